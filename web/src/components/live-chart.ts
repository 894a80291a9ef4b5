import { html } from 'lit';
import uPlot from 'uplot';
import { CHANNEL_UNITS, type SampleChannel } from '../../../server/api/messages.js';
import { LiveDecimator } from '../data/decimate.js';
import { thrustFactor } from '../data/units.js';
import { PlotElement, axisStyle } from './plot-base.js';
import { SERIES_COLOURS } from './styles.js';

const TITLES: Record<SampleChannel, string> = {
  thrust: 'Thrust',
  voltage: 'Voltage',
  current: 'Current',
  power: 'Electrical power',
  rpm: 'Speed',
  temp: 'Temperature',
  torque: 'Torque',
  out: 'Throttle output',
};

// One formatter for every tick: toLocaleTimeString builds a new one per call, which showed in profiles.
const CLOCK = new Intl.DateTimeFormat(undefined, { hour: '2-digit', minute: '2-digit', second: '2-digit', hour12: false });
const clock = (s: number) => CLOCK.format(s * 1000);

/** Two finite samples further apart than this are drawn with a gap between them (link dropped, paused). */
const GAP_MS = 2000;

/** One channel against host time over the chosen window, ending at the newest sample. */
export class DbLiveChart extends PlotElement {
  static override properties = { channel: { type: String, reflect: true } };
  declare channel: SampleChannel;

  /** Seconds, read by uPlot's x range callback: the window is fixed, not fitted to the data. */
  private _range: [number, number] = [0, 1];
  private readonly _decimator = new LiveDecimator();

  constructor() {
    super(['snapshot', 'samples']);
    this.channel = 'thrust';
  }

  protected override get plotHeight(): number {
    return 160;
  }

  /**
   * No more often than the newest sample moves by half a pixel (the line would look the same), between 15
   * and 5 times a second: 10 to 15 Hz for a minute's window (with batches every 50 ms), 5 Hz for five
   * minutes. The readouts carry the numbers; the eye does not need sixty redraws a second of a line that
   * creeps.
   */
  protected override get redrawEveryMs(): number {
    const windowMs = (this._dash.prefs?.windowS ?? 60) * 1000;
    return Math.min(200, Math.max(66, windowMs / (2 * Math.max(1, this.plotWidth || 600))));
  }

  private _unit(): { label: string; factor: number } {
    if (this.channel === 'thrust') {
      const u = this._dash.prefs?.thrustUnit ?? 'N';
      return { label: u, factor: thrustFactor(u) };
    }
    if (this.channel === 'out') return { label: '%', factor: 100 };
    return { label: CHANNEL_UNITS[this.channel], factor: 1 };
  }

  protected override renderHead() {
    return html`<span class="title">${TITLES[this.channel] ?? this.channel}</span><span class="muted">${this._unit().label}</span>`;
  }

  protected override pngDecor() {
    return { title: TITLES[this.channel] ?? this.channel, xLabel: 'host clock time', yLabel: `${TITLES[this.channel] ?? this.channel} (${this._unit().label})`, legend: [] };
  }

  protected override makeOptions(width: number, height: number): uPlot.Options {
    const a = axisStyle(this);
    const axis = { stroke: a.stroke, grid: { stroke: a.grid, width: 1 }, ticks: { stroke: a.grid, width: 1 } };
    return {
      width,
      height,
      legend: { show: false },
      cursor: { drag: { x: false, y: false, setScale: false }, points: { show: false } },
      scales: { x: { time: true, range: () => this._range } },
      // One pixel wide: a hairline is rastered far faster than a 1.5 px stroke, which must be outlined first
      // (1.2 against 2.8 ms a redraw of a 936-point line in software raster, measured side by side).
      series: [{}, { stroke: SERIES_COLOURS[this.channel] ?? '#333', width: 1, points: { show: false }, spanGaps: false }],
      // Clock time of the host, to the second: the same clock as the event list.
      axes: [{ ...axis, values: (_u, splits) => splits.map((s) => clock(s)) }, { ...axis, size: 52 }],
    };
  }

  protected override makeData(width: number): { data: uPlot.AlignedData; points: number; last: number | null } {
    const c = this._dash.client;
    const windowMs = (this._dash.prefs?.windowS ?? 60) * 1000;
    if (!c) return { data: [[], []], points: 0, last: null };
    const ring = c.ring;
    const xTo = ring.length ? ring.lastT() : Date.now();
    const xFrom = xTo - windowMs;
    this._range = [xFrom / 1000, xTo / 1000];
    const dec = this._decimator.update(ring, ring.ch[this.channel], xFrom, xTo, width, GAP_MS, this._unit().factor);
    const xs = dec.x.map((v) => v / 1000);
    let last: number | null = null;
    for (let i = dec.y.length - 1; i >= 0 && last === null; i--) last = dec.y[i];
    return { data: [xs, dec.y], points: xs.length, last };
  }
}
customElements.define('db-live-chart', DbLiveChart);
