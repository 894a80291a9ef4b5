import { LitElement, css, html, type PropertyValues } from 'lit';
import { chartPanelStyles } from './chart-styles.js';
import uPlot from 'uplot';
import { axisStyle } from './plot-base.js';
import { downloadChartPng, fileSlug, legendOf } from './chart-png.js';

export interface XySeries {
  label: string;
  colour: string;
  /** Lines join the points in order; points are dots. */
  kind: 'line' | 'points';
  x: number[];
  y: (number | null)[];
  /** One standard deviation each way, drawn as error bars. */
  yErr?: number[];
  xErr?: number[];
  dash?: number[];
}

export interface XySpec {
  title: string;
  subtitle?: string;
  xLabel: string;
  yLabel: string;
  series: XySeries[];
}

/**
 * A chart of recorded data (a past session, a comparison): x against y for a few series, error bars where
 * given, a PNG button. Built again whenever its spec changes; no live updates.
 */
export class DbXyChart extends LitElement {
  static override styles = [
    ...chartPanelStyles,
    css`
      .head {
        gap: 0.6rem;
      }
      .muted {
        color: var(--db-muted);
      }
      .plot {
        min-height: 260px;
      }
    `,
  ];

  static override properties = { spec: { attribute: false }, height: { type: Number } };
  declare spec: XySpec | null;
  declare height: number;

  private _plot: uPlot | null = null;
  private _resize: ResizeObserver | null = null;
  private _width = 0;

  constructor() {
    super();
    this.spec = null;
    this.height = 260;
  }

  override render() {
    return html`<div class="head">
        <span class="title">${this.spec?.title ?? ''}</span><span class="muted">${this.spec?.subtitle ?? ''}</span>
        <button class="png" data-testid="png" title="Download this chart as a PNG image" @click=${() => void this.downloadPng()}>PNG</button>
      </div>
      <div class="plot"></div>`;
  }

  async downloadPng(): Promise<boolean> {
    if (!this._plot || !this.spec) return false;
    return downloadChartPng(this._plot, { title: this.spec.title, ...(this.spec.subtitle ? { subtitle: this.spec.subtitle } : {}), legend: legendOf(this._plot) }, `ductbench-${fileSlug(this.spec.title)}`);
  }

  protected override firstUpdated(): void {
    const box = this.renderRoot.querySelector('.plot') as HTMLElement;
    this._resize = new ResizeObserver(() => {
      const w = Math.floor(box.clientWidth);
      if (w > 0 && w !== this._width) {
        this._width = w;
        if (this._plot) this._plot.setSize({ width: w, height: this.height });
        else this._build();
      }
    });
    this._resize.observe(box);
  }

  protected override updated(changed: PropertyValues): void {
    if (changed.has('spec') && this._width > 0) this._build();
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this._resize?.disconnect();
    this._resize = null;
    this._plot?.destroy();
    this._plot = null;
    this._width = 0;
  }

  override connectedCallback(): void {
    super.connectedCallback();
    if (this.hasUpdated && !this._resize) this.firstUpdated();
  }

  private _build(): void {
    const box = this.renderRoot.querySelector('.plot') as HTMLElement | null;
    this._plot?.destroy();
    this._plot = null;
    const spec = this.spec;
    if (!box || !spec || this._width <= 0) return;
    const a = axisStyle(this);
    const axis = { stroke: a.stroke, grid: { stroke: a.grid, width: 1 }, ticks: { stroke: a.grid, width: 1 } };
    const facets = [{ scale: 'x', auto: true }, { scale: 'y', auto: true }];
    const series: uPlot.Series[] = [
      {},
      ...spec.series.map(
        (s) =>
          ({
            label: s.label,
            stroke: s.colour,
            fill: s.kind === 'points' ? s.colour : undefined,
            width: s.kind === 'line' ? 2 : 0,
            dash: s.dash,
            paths: s.kind === 'points' ? uPlot.paths.points!() : uPlot.paths.linear!(),
            points: { show: false, size: 8, width: 0 },
            facets,
          }) as uPlot.Series,
      ),
    ];
    // Error bars and the scales they need: the y range must include mean ± std.
    const ext = (vals: number[]) => (vals.length ? [Math.min(...vals), Math.max(...vals)] : [0, 1]);
    const xs: number[] = [];
    const ys: number[] = [];
    for (const s of spec.series) {
      s.x.forEach((x, i) => {
        const y = s.y[i];
        if (!Number.isFinite(x) || y === null || !Number.isFinite(y)) return;
        const ex = s.xErr?.[i] ?? 0;
        const ey = s.yErr?.[i] ?? 0;
        xs.push(x - ex, x + ex);
        ys.push(y - ey, y + ey);
      });
    }
    const [x0, x1] = ext(xs);
    const [y0, y1] = ext(ys);
    const padX = (x1 - x0) * 0.05 || 1;
    const padY = (y1 - y0) * 0.08 || 1;
    const bars = (u: uPlot) => {
      const ctx = u.ctx;
      ctx.save();
      ctx.lineWidth = Math.max(1, devicePixelRatio);
      spec.series.forEach((s) => {
        if (!s.yErr && !s.xErr) return;
        ctx.strokeStyle = s.colour;
        s.x.forEach((x, i) => {
          const y = s.y[i];
          if (y === null || !Number.isFinite(y) || !Number.isFinite(x)) return;
          const cx = u.valToPos(x, 'x', true);
          const cy = u.valToPos(y, 'y', true);
          const cap = 4 * devicePixelRatio;
          ctx.beginPath();
          const ey = s.yErr?.[i] ?? 0;
          if (ey > 0) {
            const a1 = u.valToPos(y - ey, 'y', true);
            const a2 = u.valToPos(y + ey, 'y', true);
            ctx.moveTo(cx, a1);
            ctx.lineTo(cx, a2);
            ctx.moveTo(cx - cap, a1);
            ctx.lineTo(cx + cap, a1);
            ctx.moveTo(cx - cap, a2);
            ctx.lineTo(cx + cap, a2);
          }
          const ex = s.xErr?.[i] ?? 0;
          if (ex > 0) {
            const b1 = u.valToPos(x - ex, 'x', true);
            const b2 = u.valToPos(x + ex, 'x', true);
            ctx.moveTo(b1, cy);
            ctx.lineTo(b2, cy);
          }
          ctx.stroke();
        });
      });
      ctx.restore();
    };
    const opts: uPlot.Options = {
      mode: 2,
      width: this._width,
      height: this.height,
      legend: { show: true, live: false },
      cursor: { drag: { x: false, y: false, setScale: false }, points: { show: false } },
      scales: { x: { time: false, auto: false, range: [x0 - padX, x1 + padX] }, y: { auto: false, range: [y0 - padY, y1 + padY] } },
      series,
      axes: [
        { ...axis, label: spec.xLabel, labelSize: 18 },
        { ...axis, label: spec.yLabel, labelSize: 18, size: 60 },
      ],
      hooks: { draw: [bars] },
    };
    const data = [null, ...spec.series.map((s) => [s.x, s.y])] as unknown as uPlot.AlignedData;
    this._plot = new uPlot(opts, data, box);
    this.setAttribute('data-series', String(spec.series.length));
    this.setAttribute('data-points', String(spec.series.reduce((n, s) => n + s.x.length, 0)));
  }
}
customElements.define('db-xy-chart', DbXyChart);
