import { LitElement, html, nothing } from 'lit';
import type { Comparison } from '../../../server/compare/compare.js';
import type { SessionSummary } from '../../../server/store/types.js';
import { saveBlob, type VehicleQuery } from '../data/api.js';
import { DashboardController } from '../data/context.js';
import { fmt } from './format.js';
import { gpwStd, tableStyles } from './sessions-view.js';
import { fieldStyles, panelStyles } from './styles.js';
import type { XySeries, XySpec } from './xy-chart.js';
import './xy-chart.js';

const PALETTE = ['#1d4e89', '#c8553d', '#2a9d8f', '#8d6a9f', '#e9a23b', '#444444'];

/**
 * A baseline and other sessions on a common thrust range: thrust per watt and electrical power against thrust
 * with each operating point's spread, the comparison rows (power saving, thrust gain, net thrust, ideal saving,
 * effectiveness), what could not be compared, and the hover verdict for a vehicle.
 */
export class DbCompareView extends LitElement {
  static override styles = [panelStyles, fieldStyles, tableStyles];

  static override properties = {
    ids: { attribute: false },
    _sessions: { state: true },
    _baseline: { state: true },
    _others: { state: true },
    _vehicle: { state: true },
    _result: { state: true },
    _error: { state: true },
  };
  /** Sessions to compare, baseline first (set by the Sessions view). */
  declare ids: number[];
  declare _sessions: SessionSummary[];
  declare _baseline: number | null;
  declare _others: number[];
  declare _vehicle: { mass: string; motors: string; battery_wh: string };
  declare _result: Comparison | null;
  declare _error: string;

  private readonly _dash = new DashboardController(this, []);

  constructor() {
    super();
    this.ids = [];
    this._sessions = [];
    this._baseline = null;
    this._others = [];
    this._vehicle = { mass: '', motors: '', battery_wh: '' };
    this._result = null;
    this._error = '';
  }

  override connectedCallback(): void {
    super.connectedCallback();
    void this._load();
  }

  protected override willUpdate(changed: Map<PropertyKey, unknown>): void {
    if (changed.has('ids') && this.ids.length) {
      this._baseline = this.ids[0];
      this._others = this.ids.slice(1);
      this._result = null;
      if (this.ids.length >= 2) void this.compare();
    }
  }

  private async _load(): Promise<void> {
    const api = this._dash.dashboard?.api;
    if (!api) return;
    const r = await api.list({});
    if (r.ok) this._sessions = r.value;
    else this._error = r.error;
  }

  private _vehicleQuery(): VehicleQuery | null | 'half' {
    const v = this._vehicle;
    const given = [v.mass, v.motors, v.battery_wh].filter((x) => x.trim() !== '').length;
    if (given === 0) return null;
    if (given < 3) return 'half';
    return { mass: Number(v.mass), motors: Number(v.motors), battery_wh: Number(v.battery_wh) };
  }

  async compare(): Promise<void> {
    const api = this._dash.dashboard?.api;
    if (!api || this._baseline === null) return;
    const ids = [this._baseline, ...this._others.filter((id) => id !== this._baseline)];
    if (ids.length < 2) {
      this._error = 'pick a baseline and at least one other session';
      return;
    }
    const v = this._vehicleQuery();
    if (v === 'half') {
      this._error = 'the vehicle verdict needs all three: all-up mass, motors and battery energy';
      return;
    }
    const r = await api.compare(ids, v);
    if (r.ok) {
      this._result = r.value;
      this._error = '';
    } else {
      this._error = r.field ? `${r.field}: ${r.error}` : r.error;
    }
  }

  private async _report(): Promise<void> {
    const api = this._dash.dashboard?.api;
    const c = this._result;
    if (!api || !c) return;
    const v = this._vehicleQuery();
    const r = await api.download('compare-report', c.sessions.map((s) => s.session), v === 'half' ? null : v);
    if (r.ok) saveBlob(r.value.blob, r.value.name);
    else this._error = r.error;
  }

  private _charts(c: Comparison) {
    const colour = (i: number) => PALETTE[i % PALETTE.length];
    const gpw: XySeries[] = [];
    const pow: XySeries[] = [];
    c.sessions.forEach((s, i) => {
      const name = `${s.session === c.baseline ? 'baseline ' : ''}#${s.session} ${s.title}`.trim();
      const pts = [...s.points].sort((a, b) => a.thrust_N - b.thrust_N);
      gpw.push({
        label: name,
        colour: colour(i),
        kind: 'points',
        x: pts.map((p) => p.thrust_N),
        y: pts.map((p) => p.grams_per_watt),
        xErr: pts.map((p) => p.thrust_std_N),
        yErr: pts.map((p) => gpwStd(p.thrust_N, p.thrust_std_N, p.power_W, p.power_std_W)),
      });
      pow.push({
        label: name,
        colour: colour(i),
        kind: 'points',
        x: pts.map((p) => p.thrust_N),
        y: pts.map((p) => p.power_W),
        xErr: pts.map((p) => p.thrust_std_N),
        yErr: pts.map((p) => p.power_std_W),
      });
    });
    const range = c.common_range_N ? `common range ${c.common_range_N[0].toFixed(2)}–${c.common_range_N[1].toFixed(2)} N` : 'no common thrust range';
    const gpwSpec: XySpec = { title: 'Thrust per watt against thrust', subtitle: `± 1 std per point · ${range}`, xLabel: 'thrust (N)', yLabel: 'gf/W', series: gpw };
    const powSpec: XySpec = { title: 'Electrical power against thrust', subtitle: `± 1 std per point · ${range}`, xLabel: 'thrust (N)', yLabel: 'power (W)', series: pow };
    return html`<div class="charts">
      <db-xy-chart .spec=${gpwSpec} data-testid="compare-gpw-chart"></db-xy-chart>
      <db-xy-chart .spec=${powSpec} data-testid="compare-power-chart"></db-xy-chart>
    </div>`;
  }

  private _rows(c: Comparison) {
    if (!c.rows.length) return html`<p class="muted" data-testid="compare-no-rows">No rows: no session overlaps the baseline's measured thrust range (see the notes).</p>`;
    const pm = (v: number | null, sd: number | null) => (v === null ? '—' : `${fmt(v, 1)}${sd === null ? '' : ` ± ${fmt(sd, 1)}`}`);
    return html`<div class="scroll">
      <table data-testid="compare-rows">
        <thead>
          <tr>
            <th class="num">session</th>
            <th class="num">thrust (N)</th>
            <th class="num">baseline W</th>
            <th class="num">W</th>
            <th class="num">power saving %</th>
            <th class="num">thrust gain % (equal power)</th>
            <th class="num">net thrust (N)</th>
            <th class="num">net gain %</th>
            <th class="num">ideal saving %</th>
            <th class="num">effectiveness</th>
          </tr>
        </thead>
        <tbody>
          ${c.rows.map(
            (r) => html`<tr>
              <td class="num">#${r.session}</td>
              <td class="num">${fmt(r.thrust_N, 2)}</td>
              <td class="num">${fmt(r.baseline_power_W, 1)}</td>
              <td class="num">${fmt(r.power_W, 1)}</td>
              <td class="num">${pm(r.power_saving_pct, r.power_saving_std_pct)}</td>
              <td class="num">${pm(r.thrust_gain_pct, r.thrust_gain_std_pct)}</td>
              <td class="num">${fmt(r.net_thrust_N, 2)}</td>
              <td class="num">${r.net_thrust_gain_pct === null ? '—' : fmt(r.net_thrust_gain_pct, 1)}</td>
              <td class="num">${fmt(r.ideal_saving_pct, 1)}</td>
              <td class="num">${r.duct_effectiveness === null ? '—' : fmt(r.duct_effectiveness, 2)}</td>
            </tr>`,
          )}
        </tbody>
      </table>
    </div>`;
  }

  override render() {
    const c = this._result;
    const list = this._sessions;
    const v = this._vehicle;
    return html`
      <h2>Compare against a baseline</h2>
      <div class="row">
        <label
          >Baseline<select data-testid="compare-baseline" @change=${(e: Event) => (this._baseline = Number((e.target as HTMLSelectElement).value) || null)}>
            <option value="">choose…</option>
            ${list.map((s) => html`<option value=${s.id} ?selected=${this._baseline === s.id}>#${s.id} ${s.title}</option>`)}
          </select></label
        >
        <fieldset style="border:none;padding:0;margin:0;display:flex;flex-wrap:wrap;gap:0.2rem 0.8rem;font-size:0.85rem">
          <legend class="muted" style="font-size:0.8rem">Compared with</legend>
          ${list
            .filter((s) => s.id !== this._baseline)
            .map(
              (s) => html`<label style="display:flex;gap:0.3rem;align-items:center;color:var(--db-ink)"
                ><input
                  type="checkbox"
                  data-testid=${`compare-other-${s.id}`}
                  .checked=${this._others.includes(s.id)}
                  @change=${(e: Event) => (this._others = (e.target as HTMLInputElement).checked ? [...this._others, s.id] : this._others.filter((x) => x !== s.id))}
                />#${s.id} ${s.title}</label
              >`,
            )}
        </fieldset>
      </div>
      <div class="row">
        <label>All-up mass without ducts (kg)<input type="number" step="0.01" min="0" data-testid="vehicle-mass" .value=${v.mass} @input=${(e: Event) => (this._vehicle = { ...v, mass: (e.target as HTMLInputElement).value })} /></label>
        <label>Motors<input type="number" step="1" min="1" data-testid="vehicle-motors" .value=${v.motors} @input=${(e: Event) => (this._vehicle = { ...v, motors: (e.target as HTMLInputElement).value })} /></label>
        <label>Battery energy (Wh)<input type="number" step="1" min="0" data-testid="vehicle-battery" .value=${v.battery_wh} @input=${(e: Event) => (this._vehicle = { ...v, battery_wh: (e.target as HTMLInputElement).value })} /></label>
        <button data-testid="compare-run" @click=${() => void this.compare()}>Compare</button>
        <button data-testid="compare-report" ?disabled=${!c} @click=${() => void this._report()}>Report (HTML)</button>
      </div>
      ${this._error ? html`<p class="error" data-testid="compare-error">${this._error}</p>` : nothing}
      ${c
        ? html`<section data-testid="compare-result">
            ${this._charts(c)} ${this._rows(c)}
            ${c.notes.length
              ? html`<h2>Notes</h2>
                  <ul data-testid="compare-notes">
                    ${c.notes.map((n) => html`<li>${n}</li>`)}
                  </ul>`
              : nothing}
            ${c.verdict
              ? html`<h2>Hover verdict: ${c.verdict.vehicle.mass_kg} kg, ${c.verdict.vehicle.motors} motors, ${c.verdict.vehicle.battery_wh} Wh</h2>
                  <div data-testid="verdict">${c.verdict.text.map((t) => html`<p style="margin:0.25rem 0">${t}</p>`)}</div>`
              : html`<p class="note">Give the vehicle's all-up mass, motor count and battery energy for a hover verdict.</p>`}
          </section>`
        : nothing}
    `;
  }
}
customElements.define('db-compare-view', DbCompareView);
