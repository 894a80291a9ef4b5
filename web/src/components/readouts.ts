import { LitElement, css, html } from 'lit';
import type { SampleChannel } from '../../../server/api/messages.js';
import { DashboardController } from '../data/context.js';
import { pageScheduler, type DrawJob } from '../data/frame.js';
import { MIN_EFFICIENCY_OUTPUT, MIN_EFFICIENCY_POWER_W } from '../data/decimate.js';
import { GRAM_FORCE_N, efficiencyUnit, thrustDecimals, thrustFactor } from '../data/units.js';
import { SERIES_COLOURS } from './styles.js';

/** A value older than this (against the newest sample) is greyed: that sensor has stopped reporting. */
const STALE_MS = 2000;
/** Numbers that change sixty times a second cannot be read; five is plenty. */
const RENDER_EVERY_MS = 200;

interface Tile {
  key: string;
  label: string;
  unit: string;
  value: number;
  decimals: number;
  stale: boolean;
  colour: string;
}

/** Big live numbers: the latest value of each channel (the throttle output is in the bench panel). */
export class DbReadouts extends LitElement {
  static override styles = css`
    :host {
      display: block;
    }
    .grid {
      display: grid;
      grid-template-columns: repeat(auto-fill, minmax(7.6rem, 1fr));
      gap: 0.6rem;
    }
    .tile {
      background: var(--db-panel);
      border: 1px solid var(--db-line);
      border-left: 5px solid var(--tile-colour);
      border-radius: 8px;
      padding: 0.45rem 0.7rem 0.5rem;
      min-width: 0;
    }
    .label {
      display: flex;
      justify-content: space-between;
      gap: 0.2rem;
      font-size: 0.72rem;
      white-space: nowrap;
      overflow: hidden;
      font-weight: 650;
      letter-spacing: 0.03em;
      text-transform: uppercase;
      color: var(--db-muted);
    }
    .value {
      font-size: 1.85rem;
      font-weight: 650;
      font-variant-numeric: tabular-nums;
      line-height: 1.15;
      white-space: nowrap;
      overflow: hidden;
      text-overflow: ellipsis;
    }
    .label span:first-child {
      overflow: hidden;
      text-overflow: ellipsis;
    }
    .unit {
      flex-shrink: 0;
      text-transform: none;
      letter-spacing: 0;
      font-weight: 600;
    }
    .stale .value {
      color: var(--db-muted);
    }
  `;

  private readonly _dash = new DashboardController(this, ['snapshot', 'samples', 'connection'], (c) => {
    // A lost connection greys the numbers at once; new samples wait for the readouts' turn.
    if (c === 'connection' || c === 'snapshot') this.requestUpdate();
    else this._job?.request();
  });
  /**
   * The readouts take their turn in the page's scheduler like the charts: the text changes inside an animation
   * frame (Lit renders in the microtask after it), never in the same frame as a full set of chart redraws.
   */
  private _job: DrawJob | null = null;

  override connectedCallback(): void {
    this._job ??= pageScheduler().add(() => this.requestUpdate(), { minIntervalMs: () => RENDER_EVERY_MS, cost: 0.5 });
    super.connectedCallback();
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this._job?.release();
    this._job = null;
  }

  private _tiles(): Tile[] {
    const c = this._dash.client;
    const unit = this._dash.prefs?.thrustUnit ?? 'N';
    if (!c) return [];
    const ring = c.ring;
    const newest = ring.lastT();
    const v = (ch: SampleChannel) => ring.latest[ch];
    const stale = (ch: SampleChannel) => !(ring.latestT[ch] >= newest - STALE_MS) || c.connection.state !== 'live';
    const tile = (ch: SampleChannel, label: string, u: string, decimals: number, factor = 1): Tile => ({
      key: ch,
      label,
      unit: u,
      value: v(ch) * factor,
      decimals,
      stale: stale(ch),
      colour: SERIES_COLOURS[ch],
    });
    const power = v('power');
    // A dash below the power floor and while the motor is not driven (an idle ESC and a current sensor's zero
    // over a stopped rotor's thrust offset would read as a figure).
    const out = v('out');
    const driven = !(out < MIN_EFFICIENCY_OUTPUT); // no output channel (NaN): judged by power alone
    const eff = power >= MIN_EFFICIENCY_POWER_W && driven ? (v('thrust') / GRAM_FORCE_N / power) * (unit === 'gf' ? 1 : GRAM_FORCE_N) : NaN;
    const tiles: Tile[] = [
      tile('thrust', 'Thrust', unit, thrustDecimals(unit), thrustFactor(unit)),
      tile('voltage', 'Voltage', 'V', 2),
      tile('current', 'Current', 'A', 2),
      tile('power', 'Power', 'W', 1),
      {
        key: 'efficiency',
        label: 'Per watt',
        unit: efficiencyUnit(unit),
        value: eff,
        decimals: unit === 'gf' ? 2 : 3,
        stale: stale('thrust') || stale('power'),
        colour: '#1d6f7a',
      },
      tile('rpm', 'Speed', 'rpm', 0),
      tile('temp', 'Temp', '°C', 1),
    ];
    // Torque only where a torque cell is fitted.
    if (Number.isFinite(v('torque'))) tiles.push(tile('torque', 'Torque', 'N·m', 4));
    return tiles;
  }

  override render() {
    return html`<div class="grid">
      ${this._tiles().map(
        (t) => html`<div class="tile ${t.stale ? 'stale' : ''}" style="--tile-colour:${t.colour}" data-readout=${t.key}>
          <div class="label"><span>${t.label}</span><span class="unit">${t.unit}</span></div>
          <div class="value" data-testid="readout-${t.key}" data-unit=${t.unit}>${Number.isFinite(t.value) ? t.value.toFixed(t.decimals) : '—'}</div>
        </div>`,
      )}
    </div>`;
  }
}
customElements.define('db-readouts', DbReadouts);
