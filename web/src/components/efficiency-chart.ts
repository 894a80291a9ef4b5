import { html, nothing } from 'lit';
import uPlot from 'uplot';
import { LiveEfficiency, thinScatter } from '../data/decimate.js';
import { readPrediction } from '../data/prediction.js';
import { GRAM_FORCE_N, efficiencyUnit, thrustFactor } from '../data/units.js';
import { PlotElement, axisStyle } from './plot-base.js';

const MEASURED = '#1d6f7a';
const MODEL = '#1c2430';
const IDEAL_OPEN = '#8a94a3';
const IDEAL_DUCTED = '#b4531b';
const RUN_POINTS = '#c2185b';
/** Points taken while the throttle ramped or the rotor spun up or down: drawn apart, pale. */
const TRANSIENT = '#b3bcc6';
/** The prediction's uncertainty band, under everything. */
const BAND_FILL = 'rgba(28, 36, 48, 0.10)';
/** Side of a measured dot, CSS pixels; also the thinning cell, so kept dots tile the plot and barely overlap. */
const DOT_PX = 4;

/**
 * The measured dots as filled squares written straight into the pixels of one bitmap, put on the plot with a
 * single drawImage. With software raster (no GPU) uPlot's own points builder, a circle (an arc) per point,
 * made the scatter the most expensive thing on the page: 7,000 dots took 14 ms a redraw as arcs, 6 ms as
 * squares in one path and 2.4 ms as pixels (measured side by side in headless Chromium). At four pixels a
 * square and a dot look alike, and squares on whole pixels need no antialiasing.
 */
class DotLayer {
  private _canvas: OffscreenCanvas | HTMLCanvasElement | null = null;
  private _image: ImageData | null = null;
  private _pixels: Uint32Array | null = null;
  private readonly _rgba: number;

  constructor(
    colour: string,
    private readonly _sideCss: number,
  ) {
    // ImageData holds bytes R, G, B, A; read as one little-endian 32-bit word that is A B G R.
    const v = Number.parseInt(colour.slice(1), 16);
    this._rgba = ((0xff << 24) | ((v & 0xff) << 16) | (v & 0xff00) | ((v >> 16) & 0xff)) >>> 0;
  }

  draw(u: uPlot, seriesIdx: number): void {
    const [xs, ys] = u.data[seriesIdx] as unknown as [ArrayLike<number>, ArrayLike<number | null>];
    const n = Math.min(xs?.length ?? 0, ys?.length ?? 0);
    if (n === 0) return;
    const { left, top, width, height } = u.bbox; // canvas pixels
    const w = Math.max(1, Math.round(width));
    const h = Math.max(1, Math.round(height));
    if (!this._canvas || this._canvas.width !== w || this._canvas.height !== h || !this._image || !this._pixels) {
      this._canvas = typeof OffscreenCanvas === 'function' ? new OffscreenCanvas(w, h) : Object.assign(document.createElement('canvas'), { width: w, height: h });
      this._image = new ImageData(w, h);
      this._pixels = new Uint32Array(this._image.data.buffer);
    }
    const px = this._pixels;
    px.fill(0);
    const side = Math.max(1, Math.round(this._sideCss * uPlot.pxRatio));
    const half = side / 2;
    const colour = this._rgba;
    for (let i = 0; i < n; i++) {
      const y = ys[i];
      if (y === null || y !== y) continue;
      const x0 = Math.round(u.valToPos(xs[i], 'x', true) - left - half);
      const y0 = Math.round(u.valToPos(y, 'y', true) - top - half);
      const xa = Math.max(0, x0), xb = Math.min(w, x0 + side);
      const ya = Math.max(0, y0), yb = Math.min(h, y0 + side);
      for (let r = ya; r < yb; r++) px.fill(colour, r * w + xa, r * w + xb);
    }
    const ctx = this._canvas.getContext('2d') as CanvasRenderingContext2D | OffscreenCanvasRenderingContext2D;
    ctx.putImageData(this._image, 0, 0);
    u.ctx.drawImage(this._canvas, left, top);
  }
}

/** The air density and rig the daemon computes with (snapshot.extras.atmosphere and .rig). */
export function airAndRig(extras: Readonly<Record<string, unknown>> | undefined): { density: number | null; source: string | null; rig: string | null } {
  const a = extras?.atmosphere as { density_kg_m3?: unknown; source?: unknown } | undefined;
  const r = extras?.rig as { name?: unknown } | null | undefined;
  return {
    density: typeof a?.density_kg_m3 === 'number' && Number.isFinite(a.density_kg_m3) ? a.density_kg_m3 : null,
    source: typeof a?.source === 'string' ? a.source : null,
    rig: typeof r?.name === 'string' ? r.name : null,
  };
}

/**
 * Thrust per watt against thrust: the recent measured points as dots (the chosen time window, thinned to one
 * per dot-sized cell; idle and coasting rows left out, see efficiencyPoints), and, when the daemon provides extras.prediction (see data/prediction.ts), the model's
 * curve and the ideal open and ducted lines on top.
 */
export class DbEfficiencyChart extends PlotElement {
  private readonly _points = new LiveEfficiency();
  private readonly _dots = new DotLayer(MEASURED, DOT_PX);
  private readonly _transientDots = new DotLayer(TRANSIENT, DOT_PX);
  /** Ramp and spin-up/down points: drawn apart (pale) or left out. */
  private _transients: 'apart' | 'hidden' = 'apart';
  /** The band in data units as last handed to the plot: thrust, lower and upper edge. */
  private _band: { x: number[]; lo: (number | null)[]; hi: (number | null)[] } | null = null;

  constructor() {
    super(['snapshot', 'samples', 'extras', 'run']);
  }

  protected override get plotHeight(): number {
    return 300;
  }

  /**
   * A scatter of the last minutes does not need sixty frames a second, and thinning a five-minute window
   * at 1 kHz (300,000 points) costs a few milliseconds: four times a second is plenty.
   */
  protected override get redrawEveryMs(): number {
    return 250;
  }

  /** Thousands of dots on a plot twice the height of a live chart: a frame of its own. */
  protected override get drawCost(): number {
    return 2;
  }

  private _units() {
    const u = this._dash.prefs?.thrustUnit ?? 'N';
    // Thrust per watt follows the thrust unit: gf/W (the usual figure) or N/W.
    return { thrust: u, eff: efficiencyUnit(u), xf: thrustFactor(u), yf: u === 'gf' ? 1 : GRAM_FORCE_N };
  }

  private _airText(): string {
    const a = airAndRig(this._dash.client?.extras);
    const parts: string[] = [];
    if (a.rig) parts.push(`rig ${a.rig}`);
    if (a.density !== null) parts.push(`air ${a.density.toFixed(3)} kg/m³${a.source ? ` (${a.source})` : ''}`);
    return parts.join(' · ');
  }

  protected override renderHead() {
    const u = this._units();
    const p = readPrediction(this._dash.client?.extras);
    const air = this._airText();
    return html`<span class="title">Thrust per watt</span
      ><span class="muted">${u.eff} against thrust (${u.thrust})${p ? '' : ' · no model overlay'}</span
      >${air ? html`<span class="muted" data-testid="air">${air}</span>` : ''}${p
        ? html`<span class="muted" data-testid="model-lines">model and ideal ${p.idealDucted.some((x) => x !== null) ? 'open and ducted' : 'open'}</span>`
        : ''}${p?.band
        ? html`<span class="muted" data-testid="band" data-kind=${p.band.kind}>shaded: model band, ${p.band.text}</span>`
        : nothing}<button
        class="png"
        data-testid="eff-transients"
        aria-pressed=${this._transients === 'apart' ? 'true' : 'false'}
        title="Points taken while the throttle ramps or the rotor spins up or down: thrust lags power there"
        @click=${() => {
          this._transients = this._transients === 'apart' ? 'hidden' : 'apart';
          this.requestUpdate();
          this._rebuild();
        }}
      >
        ${this._transients === 'apart' ? 'ramps: pale' : 'ramps: hidden'}
      </button>`;
  }

  protected override pngDecor() {
    const u = this._units();
    return { title: 'Thrust per watt', subtitle: `${u.eff} against thrust (${u.thrust})${this._airText() ? ` · ${this._airText()}` : ''}` };
  }

  protected override makeOptions(width: number, height: number): uPlot.Options {
    const a = axisStyle(this);
    const u = this._units();
    const axis = { stroke: a.stroke, grid: { stroke: a.grid, width: 1 }, ticks: { stroke: a.grid, width: 1 } };
    // The ideal lines climb without bound towards zero thrust; letting them set the y range would squash the
    // measured cloud into a strip at the bottom. They are drawn, clipped, in the range the data and model set.
    // The ideal lines climb without bound towards zero thrust; the y range (below) ignores them and they are
    // drawn clipped in the range the measurements and the model set.
    const line = (label: string, stroke: string, dash?: number[]): uPlot.Series => ({
      label,
      stroke,
      width: 2,
      dash,
      points: { show: false },
      spanGaps: false,
      facets: [{ scale: 'x', auto: true }, { scale: 'y', auto: true }],
    } as uPlot.Series);
    return {
      mode: 2,
      width,
      height,
      legend: { show: true, live: false },
      cursor: { drag: { x: false, y: false, setScale: false }, points: { show: false } },
      scales: {
        x: { time: false, auto: true },
        y: {
          auto: true,
          // The y range from what was measured and what the model says (series 1, 2 and 5), never from the
          // ideal lines, which climb without bound towards zero thrust.
          range: (plot: uPlot, dataMin: number, dataMax: number): uPlot.Range.MinMax => {
            let lo = Infinity;
            let hi = -Infinity;
            for (const i of [1, 2, 5]) {
              const ys = (plot.data[i] as unknown as [number[], (number | null)[]] | undefined)?.[1] ?? [];
              for (const y of ys) {
                if (y === null || !Number.isFinite(y)) continue;
                if (y < lo) lo = y;
                if (y > hi) hi = y;
              }
            }
            if (!Number.isFinite(lo)) return [dataMin, dataMax];
            const pad = (hi - lo) * 0.08 || Math.abs(hi) * 0.1 || 1;
            return [Math.max(0, lo - pad), hi + pad];
          },
        },
      },
      series: [
        {},
        {
          label: 'measured',
          stroke: MEASURED,
          fill: MEASURED,
          // Drawn by the DotLayer from the drawSeries hook below: no path, and the per-point markers off.
          paths: () => null,
          points: { show: false, size: DOT_PX, width: 0 },
          facets: [{ scale: 'x', auto: true }, { scale: 'y', auto: true }],
        } as uPlot.Series,
        line('model', MODEL),
        line('ideal, open', IDEAL_OPEN, [6, 4]),
        line('ideal, ducted', IDEAL_DUCTED, [2, 3]),
        {
          label: 'sequence points',
          stroke: RUN_POINTS,
          fill: RUN_POINTS,
          paths: uPlot.paths.points!(),
          points: { show: false, size: 11, width: 0 },
          facets: [{ scale: 'x', auto: true }, { scale: 'y', auto: true }],
        } as uPlot.Series,
        {
          label: 'ramps, spin-up/down',
          stroke: TRANSIENT,
          fill: TRANSIENT,
          paths: () => null,
          points: { show: false, size: DOT_PX, width: 0 },
          facets: [{ scale: 'x', auto: true }, { scale: 'y', auto: true }],
        } as uPlot.Series,
      ],
      hooks: {
        drawClear: [(plot) => this._drawBand(plot)],
        // The pale ramp points under the steady ones.
        drawSeries: [(plot, i) => (i === 1 ? this._dots.draw(plot, i) : i === 6 ? this._transientDots.draw(plot, i) : undefined)],
      },
      axes: [
        { ...axis, label: `thrust (${u.thrust})`, labelSize: 18 },
        { ...axis, label: u.eff, labelSize: 18, size: 56 },
      ],
    };
  }

  protected override makeData(width: number): { data: uPlot.AlignedData; points: number; last: number | null } {
    const c = this._dash.client;
    const u = this._units();
    const empty: [number[], number[]] = [[], []];
    let measured: [number[], number[]] = empty;
    let transient: [number[], number[]] = empty;
    let last: number | null = null;
    if (c) {
      const ring = c.ring;
      const xTo = ring.length ? ring.lastT() : Date.now();
      const windowMs = (this._dash.prefs?.windowS ?? 60) * 1000;
      const pts = this._points.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, xTo - windowMs);
      // Steady points apart from those taken in a ramp or a spin-up/down (thrust lags power there).
      const n = pts.gramsPerWatt.length;
      const sx: number[] = [], sy: number[] = [], tx: number[] = [], ty: number[] = [];
      for (let i = 0; i < n; i++) {
        if (pts.steady[i]) {
          sx.push(pts.thrustN[i]);
          sy.push(pts.gramsPerWatt[i]);
        } else {
          tx.push(pts.thrustN[i]);
          ty.push(pts.gramsPerWatt[i]);
        }
      }
      // One point per dot-sized cell: more would be drawn over each other. Thinned in newtons and gf/W, then
      // converted: a positive factor maps the same points to the same cells.
      const thin = thinScatter(sx, sy, width / DOT_PX, this.plotHeight / DOT_PX);
      measured = [thin.x.map((v) => v * u.xf), thin.y.map((v) => v * u.yf)];
      if (this._transients === 'apart') {
        const tt = thinScatter(tx, ty, width / DOT_PX, this.plotHeight / DOT_PX);
        transient = [tt.x.map((v) => v * u.xf), tt.y.map((v) => v * u.yf)];
      }
      this.setAttribute('data-steady', String(sx.length));
      this.setAttribute('data-transient', String(tx.length));
      last = n ? pts.gramsPerWatt[n - 1] * u.yf : null;
    }
    const p = readPrediction(c?.extras);
    const scaleY = (a: (number | null)[]) => a.map((v) => (v === null ? null : v * u.yf));
    const px = p ? p.thrustN.map((v) => v * u.xf) : [];
    // The operating points of the current (or last) sequence run, one large dot each.
    const runPts = (c?.run?.points ?? []).filter((q) => q.channels.thrust && q.grams_per_watt !== null);
    const run: [number[], number[]] = [runPts.map((q) => q.channels.thrust!.mean * u.xf), runPts.map((q) => (q.grams_per_watt as number) * u.yf)];
    this._band = p && p.bandLo && p.bandHi ? { x: px, lo: scaleY(p.bandLo), hi: scaleY(p.bandHi) } : null;
    this.setAttribute('data-band', p?.band?.kind ?? '');
    const data = [
      null,
      measured,
      p ? [px, scaleY(p.gramsPerWatt)] : empty,
      p ? [px, scaleY(p.idealOpen)] : empty,
      p ? [px, scaleY(p.idealDucted)] : empty,
      run,
      transient,
    ];
    return { data: data as unknown as uPlot.AlignedData, points: measured[0].length, last };
  }

  /** Shades the band between its edges, clipped to the plot; unbounded stretches (no prediction there) are left out. */
  private _drawBand(u: uPlot): void {
    const b = this._band;
    if (!b || b.x.length < 2) return;
    const ctx = u.ctx;
    const { left, top, width, height } = u.bbox;
    ctx.save();
    ctx.beginPath();
    ctx.rect(left, top, width, height);
    ctx.clip();
    ctx.fillStyle = BAND_FILL;
    let i = 0;
    const ok = (k: number) => b.lo[k] !== null && b.hi[k] !== null && Number.isFinite(b.lo[k]!) && Number.isFinite(b.hi[k]!);
    while (i < b.x.length) {
      while (i < b.x.length && !ok(i)) i++;
      let j = i;
      while (j < b.x.length && ok(j)) j++;
      if (j - i >= 2) {
        ctx.beginPath();
        for (let k = i; k < j; k++) ctx.lineTo(u.valToPos(b.x[k], 'x', true), u.valToPos(b.hi[k]!, 'y', true));
        for (let k = j - 1; k >= i; k--) ctx.lineTo(u.valToPos(b.x[k], 'x', true), u.valToPos(b.lo[k]!, 'y', true));
        ctx.closePath();
        ctx.fill();
      }
      i = j;
    }
    ctx.restore();
  }
}
customElements.define('db-efficiency-chart', DbEfficiencyChart);
