// What both charts share: a uPlot inside the shadow root, sized to the element by a ResizeObserver, redrawn
// in its turn in the page's DrawScheduler (at most once per animation frame however many messages arrive,
// no more often than the chart's interval, and never all six charts in one frame), rebuilt when its options
// change (units), and released when the element leaves the page. uPlot's stylesheet is adopted into each
// shadow root because page styles do not reach inside one.
import { LitElement, css, html, type PropertyValues } from 'lit';
import { chartPanelStyles } from './chart-styles.js';
import uPlot from 'uplot';
import { DashboardController } from '../data/context.js';
import { pageScheduler, type DrawJob } from '../data/frame.js';
import type { ClientChange } from '../data/client.js';
import { downloadChartPng, fileSlug, legendOf, type PngDecor } from './chart-png.js';

export abstract class PlotElement extends LitElement {
  static override styles = [
    ...chartPanelStyles,
    css`
      .head {
        justify-content: space-between;
        gap: 0.5rem;
      }
      .plot {
        min-height: var(--plot-height, 170px);
      }
    `,
  ];

  protected readonly _dash: DashboardController;
  protected _plot: uPlot | null = null;
  /** Our turn in the page's scheduler while on the page. */
  private _job: DrawJob | null = null;
  private _resize: ResizeObserver | null = null;
  /**
   * Whether the chart is rendered at all: the live bench stays mounted but hidden (display: none) while the
   * Sessions or Compare view is open, and its six charts need not keep drawing then. The huge margin makes a
   * chart that is merely scrolled out of view count as shown, so it is always current when scrolled to.
   */
  private _shown: IntersectionObserver | null = null;
  private _hidden = false;
  /** New data came while hidden: draw when shown again. */
  private _missed = false;
  private _width = 0;
  private _draws = 0;
  /** Whether the current uPlot was built with any data at all (see _draw). */
  private _builtWithData = false;

  constructor(changes: readonly ClientChange[]) {
    super();
    this._dash = new DashboardController(this, changes, (c) => {
      if (c === 'prefs') return this._rebuild();
      if (c !== 'samples') this.requestUpdate(); // the head may describe the snapshot or extras
      this._schedule();
    });
  }

  /** Least time between two redraws; 0 means every animation frame that has new data. */
  protected get redrawEveryMs(): number {
    return 0;
  }

  /** Share of a frame this chart's redraw takes, against the scheduler's budget (see DrawScheduler). */
  protected get drawCost(): number {
    return 1;
  }

  /** Plot width in CSS pixels (0 before the first layout). */
  protected get plotWidth(): number {
    return this._width;
  }

  private _schedule(): void {
    this._job?.request();
  }

  /** Plot height in CSS pixels. */
  protected abstract get plotHeight(): number;
  protected abstract makeOptions(width: number, height: number): uPlot.Options;
  /** Builds the data for the current width; also returns what the test hooks report. */
  protected abstract makeData(width: number): { data: uPlot.AlignedData; points: number; last: number | null };
  protected abstract renderHead(): unknown;
  /** Title, units and axis labels the PNG carries around uPlot's canvas. */
  protected abstract pngDecor(): PngDecor;

  override render() {
    return html`<div class="head">
        ${this.renderHead()}<button class="png" data-testid="png" title="Download this chart as a PNG image" @click=${() => void this.downloadPng()}>PNG</button>
      </div>
      <div class="plot" style="--plot-height:${this.plotHeight}px"></div>`;
  }

  /** Saves the chart as drawn now, with its title and axis labels. False when there is no chart yet. */
  async downloadPng(): Promise<boolean> {
    if (!this._plot) return false;
    const d = this.pngDecor();
    return downloadChartPng(this._plot, { legend: legendOf(this._plot), ...d }, `ductbench-${fileSlug(d.title)}-${new Date().toISOString().slice(0, 19).replace(/[:T]/g, '')}`);
  }

  protected override firstUpdated(_changed: PropertyValues): void {
    const box = this.renderRoot.querySelector('.plot') as HTMLElement;
    this._resize = new ResizeObserver(() => {
      const w = Math.floor(box.clientWidth);
      if (w > 0 && w !== this._width) {
        this._width = w;
        if (this._plot) this._plot.setSize({ width: w, height: this.plotHeight });
        else this._rebuild();
        this._schedule();
      }
    });
    this._resize.observe(box);
    this._shown = new IntersectionObserver(
      (entries) => {
        const e = entries[entries.length - 1];
        this._hidden = !e.isIntersecting;
        if (!this._hidden && this._missed) {
          this._missed = false;
          this._schedule();
        }
      },
      { rootMargin: '100000px' },
    );
    this._shown.observe(this);
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this._job?.release();
    this._job = null;
    this._resize?.disconnect();
    this._resize = null;
    this._shown?.disconnect();
    this._shown = null;
    this._hidden = false;
    this._plot?.destroy();
    this._plot = null;
    this._width = 0;
  }

  override connectedCallback(): void {
    this._job ??= pageScheduler().add(() => this._draw(), { minIntervalMs: () => this.redrawEveryMs, cost: this.drawCost });
    super.connectedCallback();
    // Re-attached after a move: observe again (firstUpdated runs only once).
    if (this.hasUpdated && !this._resize) this.firstUpdated(new Map());
  }

  protected _rebuild(): void {
    this.requestUpdate(); // the head may show units too
    const box = this.renderRoot.querySelector('.plot') as HTMLElement | null;
    if (!box || this._width <= 0) return;
    this._plot?.destroy();
    const opts = this.makeOptions(this._width, this.plotHeight);
    const data = this.makeData(this._width).data;
    this._builtWithData = hasData(data);
    this._plot = new uPlot(opts, data, box);
    this._schedule();
  }

  private _draw(): void {
    if (!this._plot) return;
    if (this._hidden) {
      this._missed = true;
      return;
    }
    const { data, points, last } = this.makeData(this._width);
    if (!this._builtWithData && hasData(data)) {
      // A uPlot made with no data at all (the page opened before the snapshot) sizes its axes to nothing;
      // in faceted mode (the scatter) later setData calls then paint a blank canvas. Build it again now.
      this._rebuild();
      return;
    }
    this._plot.setData(data);
    this._draws++;
    // Hooks for tests and for anyone debugging in the inspector: what was last handed to uPlot.
    this.setAttribute('data-points', String(points));
    this.setAttribute('data-draws', String(this._draws));
    this.setAttribute('data-last', last === null ? '' : String(last));
  }
}

function hasData(data: uPlot.AlignedData): boolean {
  // Faceted data (mode 2) is [null, [xs, ys], ...]; aligned data is [xs, ys, ...].
  const first = data[0] as ArrayLike<number> | null;
  if (first === null) return (data as unknown as ([ArrayLike<number>, unknown] | null)[]).some((s) => s !== null && s[0].length > 0);
  return first.length > 0;
}

/** Axis and grid colours from the page's custom properties, read once per plot build. */
export function axisStyle(el: Element): { stroke: string; grid: string } {
  const cs = getComputedStyle(el);
  return {
    stroke: cs.getPropertyValue('--db-muted').trim() || '#555',
    grid: cs.getPropertyValue('--db-line').trim() || '#ddd',
  };
}
