import { html } from 'lit';
import uPlot from 'uplot';
import { efficiencyPoints, thinScatter } from '../data/decimate.js';
import { readPrediction } from '../data/prediction.js';
import { GRAM_FORCE_N, efficiencyUnit, thrustFactor } from '../data/units.js';
import { PlotElement, axisStyle } from './plot-base.js';

const MEASURED = '#1d6f7a';
const MODEL = '#1c2430';
const IDEAL_OPEN = '#8a94a3';
const IDEAL_DUCTED = '#b4531b';
const RUN_POINTS = '#c2185b';

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
 * per pixel cell; idle and coasting rows left out, see efficiencyPoints), and, when the daemon provides extras.prediction (see data/prediction.ts), the model's
 * curve and the ideal open and ducted lines on top.
 */
export class DbEfficiencyChart extends PlotElement {
  constructor() {
    super(['snapshot', 'samples', 'extras', 'run']);
  }

  protected override get plotHeight(): number {
    return 300;
  }

  /**
   * A scatter of the last minutes does not need sixty frames a second, and re-pairing a five-minute window
   * at 1 kHz costs tens of milliseconds: four times a second is plenty.
   */
  protected override get redrawEveryMs(): number {
    return 250;
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
      >${air ? html`<span class="muted" data-testid="air">${air}</span>` : ''}`;
  }

  protected override pngDecor() {
    const u = this._units();
    return { title: 'Thrust per watt', subtitle: `${u.eff} against thrust (${u.thrust})${this._airText() ? ` · ${this._airText()}` : ''}` };
  }

  protected override makeOptions(width: number, height: number): uPlot.Options {
    const a = axisStyle(this);
    const u = this._units();
    const axis = { stroke: a.stroke, grid: { stroke: a.grid, width: 1 }, ticks: { stroke: a.grid, width: 1 } };
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
      scales: { x: { time: false, auto: true }, y: { auto: true } },
      series: [
        {},
        {
          label: 'measured',
          stroke: MEASURED,
          fill: MEASURED,
          // The points path builder draws every point as a filled dot (size from points.size); the per-point
          // markers are off so nothing is drawn twice.
          paths: uPlot.paths.points!(),
          points: { show: false, size: 5, width: 0 },
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
      ],
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
    let last: number | null = null;
    if (c) {
      const ring = c.ring;
      const xTo = ring.lastT();
      const windowMs = (this._dash.prefs?.windowS ?? 60) * 1000;
      const i0 = ring.length ? ring.lowerBound(xTo - windowMs) : 0;
      const pts = efficiencyPoints(ring.t, ring.ch.thrust, ring.ch.power, ring, i0, ring.length, ring.ch.out);
      const xs = pts.thrustN.map((v) => v * u.xf);
      const ys = pts.gramsPerWatt.map((v) => v * u.yf);
      const thin = thinScatter(xs, ys, width, this.plotHeight);
      measured = [thin.x, thin.y];
      last = ys.length ? ys[ys.length - 1] : null;
    }
    const p = readPrediction(c?.extras);
    const scaleY = (a: (number | null)[]) => a.map((v) => (v === null ? null : v * u.yf));
    const px = p ? p.thrustN.map((v) => v * u.xf) : [];
    // The operating points of the current (or last) sequence run, one large dot each.
    const runPts = (c?.run?.points ?? []).filter((q) => q.channels.thrust && q.grams_per_watt !== null);
    const run: [number[], number[]] = [runPts.map((q) => q.channels.thrust!.mean * u.xf), runPts.map((q) => (q.grams_per_watt as number) * u.yf)];
    const data = [
      null,
      measured,
      p ? [px, scaleY(p.gramsPerWatt)] : empty,
      p ? [px, scaleY(p.idealOpen)] : empty,
      p ? [px, scaleY(p.idealDucted)] : empty,
      run,
    ];
    return { data: data as unknown as uPlot.AlignedData, points: measured[0].length, last };
  }
}
customElements.define('db-efficiency-chart', DbEfficiencyChart);
