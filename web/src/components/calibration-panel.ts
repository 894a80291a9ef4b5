import { LitElement, css, html, nothing } from 'lit';
import {
  MAX_REFERENCE,
  MAX_SPAN_MASSES,
  MAX_SPAN_MASS_KG,
  type CalibrationAction,
  type CalibrationEntryView,
  type CalibrationJobView,
  type CalibrationStatusView,
} from '../../../server/api/messages.js';
import type { BenchClient, Command } from '../data/client.js';
import { DashboardController } from '../data/context.js';
import { fmt } from './format.js';
import { fieldStyles, panelStyles } from './styles.js';

/** Asks the page to show the calibration view (from the warnings on the live bench). */
export const OPEN_CALIBRATION = 'db-open-calibration';

const ACTION_TITLES: Record<CalibrationAction, string> = {
  tare: 'Tare',
  span: 'Load-cell span',
  current_zero: 'Current zero',
  current_reference: 'Current scale',
  voltage_reference: 'Voltage scale',
  rpm_pulses: 'rpm pulses per revolution',
};

const STATE_LABELS: Record<CalibrationJobView['state'], string> = {
  placing: 'waiting for you',
  measuring: 'measuring',
  applied: 'applied',
  refused: 'refused',
  cancelled: 'cancelled',
  failed: 'not applied',
};

const CHANNEL_UNITS: Record<CalibrationEntryView['channel'], string> = { thrust: 'N', voltage: 'V', current: 'A', torque: 'N·m', rpm: '' };

/**
 * Parses the masses the operator types ("0.2, 0.5 1.0", kg) the way the daemon will check them.
 * Returns the masses or a reason for people.
 */
export function parseMasses(text: string): { masses: number[] } | { error: string } {
  const parts = text
    .split(/[\s,;]+/)
    .map((s) => s.trim())
    .filter((s) => s !== '');
  if (parts.length === 0) return { error: 'enter the known masses in kilograms, e.g. 0.2, 0.5, 1.0' };
  const masses: number[] = [];
  for (const p of parts) {
    const m = Number(p);
    if (!Number.isFinite(m)) return { error: `${JSON.stringify(p)} is not a number of kilograms` };
    if (m < 0 || m > MAX_SPAN_MASS_KG) return { error: `${m} kg is outside 0..${MAX_SPAN_MASS_KG} kg` };
    masses.push(m);
  }
  if (masses.length > MAX_SPAN_MASSES) return { error: `at most ${MAX_SPAN_MASSES} masses` };
  if (new Set(masses).size !== masses.length) return { error: 'a mass is listed twice' };
  if (!masses.some((m) => m > 0)) return { error: 'at least one mass above 0 kg' };
  return { masses };
}

/** Why this dashboard cannot calibrate now, or null when it can. */
export function calibrationBlocked(c: BenchClient | null): string | null {
  if (!c || c.connection.state !== 'live') return 'not connected to the daemon';
  const s = c.calibration;
  if (!s) return 'this daemon does not offer calibration from the dashboard';
  if (s.unavailable) return s.unavailable;
  if (c.role !== 'controller') return 'this dashboard is a viewer: calibration belongs to the controlling dashboard';
  const st = c.bench?.state;
  if (st !== 'safe') return `calibration needs the bench connected, disarmed and safe (it is ${st ?? 'unknown'})`;
  if (c.run?.live) return 'a sequence is running';
  return null;
}

function fmtDate(iso: string): string {
  const d = new Date(iso);
  if (Number.isNaN(d.getTime())) return iso;
  const p = (n: number) => String(n).padStart(2, '0');
  return `${d.getFullYear()}-${p(d.getMonth() + 1)}-${p(d.getDate())} ${p(d.getHours())}:${p(d.getMinutes())}`;
}

function describeEntry(e: CalibrationEntryView): string {
  switch (e.kind) {
    case 'tare':
      return 'zeroed in the firmware';
    case 'span':
      return `${e.points?.length ?? '?'} loads, non-linearity ${fmt(e.nonLinearityPct, 3)} %`;
    case 'zero':
      return `rest reading ${fmt(e.points?.[0]?.raw, 3)} A`;
    case 'scale':
      return `read ${fmt(e.points?.[0]?.raw, 3)} against ${fmt(e.points?.[0]?.reference, 3)} ${CHANNEL_UNITS[e.channel]}`;
    case 'pulses_per_rev':
      return e.note ?? '';
  }
}

/**
 * Calibration from the dashboard: tare; a span with known masses, guided load by load (the daemon names the
 * load, the operator places it and confirms, the daemon measures), with the readings, residuals and
 * non-linearity, and a refused fit's reason; current zero and scale, voltage scale against a meter; rpm pulses;
 * the calibration in force, its warnings and the dated history. Everything here is the daemon's state
 * (extras.calibration, extras.calibration_history): a reconnecting page carries on where it was.
 */
export class DbCalibrationPanel extends LitElement {
  static override styles = [
    panelStyles,
    fieldStyles,
    css`
      .grid {
        display: grid;
        grid-template-columns: repeat(auto-fit, minmax(14.5rem, 1fr));
        gap: 0.8rem;
      }
      section {
        border: 1px solid var(--db-line);
        border-radius: 6px;
        padding: 0.6rem 0.7rem;
      }
      h3 {
        margin: 0 0 0.4rem;
        font-size: 0.95rem;
      }
      input {
        width: 100%;
      }
      input[type='number'] {
        width: 6.5rem;
      }
      .row {
        display: flex;
        gap: 0.5rem;
        align-items: end;
        flex-wrap: wrap;
        margin-top: 0.4rem;
      }
      .job {
        border: 2px solid var(--db-accent);
        border-radius: 8px;
        padding: 0.7rem 0.8rem;
        margin-bottom: 0.8rem;
      }
      .job.ended {
        border-width: 1px;
        border-color: var(--db-line-strong);
      }
      .job.refused,
      .job.failed {
        border-color: var(--db-danger);
      }
      .job-head {
        display: flex;
        gap: 0.6rem;
        align-items: baseline;
        flex-wrap: wrap;
      }
      .prompt {
        font-size: 1.15rem;
        font-weight: 650;
        margin: 0.5rem 0;
      }
      .reason {
        margin: 0.5rem 0 0;
      }
      .reason.bad {
        color: var(--db-danger);
        font-weight: 600;
      }
      ol.steps {
        display: flex;
        gap: 0.3rem;
        flex-wrap: wrap;
        list-style: none;
        margin: 0.3rem 0;
        padding: 0;
      }
      ol.steps li {
        padding: 0.1rem 0.55rem;
        border-radius: 999px;
        font-size: 0.82rem;
        background: var(--db-line);
      }
      ol.steps li.done {
        background: var(--db-good-bg);
        color: var(--db-good);
      }
      ol.steps li.now {
        background: var(--db-accent);
        color: #fff;
      }
      table {
        width: 100%;
        border-collapse: collapse;
        font-size: 0.85rem;
        font-variant-numeric: tabular-nums;
        margin-top: 0.5rem;
      }
      th,
      td {
        text-align: right;
        padding: 0.2rem 0.45rem;
        border-bottom: 1px solid var(--db-line);
        white-space: nowrap;
      }
      th {
        color: var(--db-muted);
        font-weight: 600;
        font-size: 0.78rem;
      }
      td.left,
      th.left {
        text-align: left;
      }
      td.wrap {
        white-space: normal;
      }
      .scroll {
        overflow-x: auto;
      }
      /* Readings and the calibration in force are a few numbers: keep them together, not spread over the page. */
      table.compact {
        width: auto;
        min-width: min(100%, 34rem);
      }
      ul.warnings {
        margin: 0 0 0.8rem;
        padding: 0.5rem 0.8rem 0.5rem 1.6rem;
        background: var(--db-warn-bg);
        color: var(--db-warn);
        border-radius: 6px;
        font-weight: 600;
      }
      .blocked {
        margin: 0 0 0.8rem;
        padding: 0.5rem 0.8rem;
        border-radius: 6px;
        background: var(--db-line);
      }
      .fit {
        display: flex;
        gap: 0.4rem 1.2rem;
        flex-wrap: wrap;
        margin-top: 0.5rem;
        font-variant-numeric: tabular-nums;
      }
      button.primary:not(:disabled) {
        background: var(--db-accent);
        border-color: var(--db-accent);
        color: #fff;
      }
    `,
  ];

  static override properties = {
    _masses: { state: true },
    _amps: { state: true },
    _volts: { state: true },
    _ppr: { state: true },
    _message: { state: true },
  };
  declare _masses: string;
  declare _amps: string;
  declare _volts: string;
  declare _ppr: { actual: number; firmware: number };
  declare _message: string;

  private readonly _dash = new DashboardController(this, ['connection', 'snapshot', 'bench', 'extras', 'run', 'role']);

  constructor() {
    super();
    this._masses = '0.2, 0.5, 1.0';
    this._amps = '';
    this._volts = '';
    this._ppr = { actual: 1, firmware: 1 };
    this._message = '';
  }

  private async _send(cmd: Command): Promise<void> {
    const c = this._dash.client;
    if (!c) return;
    this._message = '';
    const r = await c.send(cmd);
    if (!r.ok) this._message = `Refused: ${r.error}`;
  }

  private _startSpan(): void {
    const p = parseMasses(this._masses);
    if ('error' in p) {
      this._message = `Span: ${p.error}`;
      return;
    }
    void this._send({ type: 'calibration_span_start', masses_kg: p.masses });
  }

  private _reference(channel: 'current' | 'voltage'): void {
    const text = channel === 'current' ? this._amps : this._volts;
    const v = Number(text);
    const unit = channel === 'current' ? 'A' : 'V';
    if (text.trim() === '' || !Number.isFinite(v) || v <= 0 || v > MAX_REFERENCE[channel]) {
      this._message = `${channel === 'current' ? 'Current' : 'Voltage'} scale: type your meter's reading, above 0 and at most ${MAX_REFERENCE[channel]} ${unit}`;
      return;
    }
    void this._send({ type: 'calibration_reference', channel, reading: v });
  }

  private _renderJob(j: CalibrationJobView) {
    const span = j.action === 'span';
    const unit = span ? 'N' : j.action === 'current_zero' || j.action === 'current_reference' ? 'A' : 'V';
    const ended = !j.live;
    const bad = j.state === 'refused' || j.state === 'failed';
    const fit = j.fit;
    return html`<div class="job ${ended ? 'ended' : ''} ${j.state}" data-testid="cal-job" data-job=${String(j.job)} data-state=${j.state} data-action=${j.action} data-step=${String(j.step)} data-readings=${String(j.readings.length)}>
      <div class="job-head">
        <strong>${ACTION_TITLES[j.action]}</strong>
        <span class="badge ${j.state === 'applied' ? 'good' : bad ? 'bad' : j.live ? 'warn' : ''}" data-testid="cal-state">${STATE_LABELS[j.state]}</span>
        ${span ? html`<span class="muted">loads ${j.loads_kg.map((k) => `${k} kg`).join(' · ')}</span>` : nothing}
      </div>
      ${span
        ? html`<ol class="steps" aria-label="Span loads">
            ${j.loads_kg.map(
              (kg, i) => html`<li class=${i < j.readings.length ? 'done' : j.live && i === j.step ? 'now' : ''}>${i + 1}. ${kg === 0 ? 'empty' : `${kg} kg`}</li>`,
            )}
          </ol>`
        : nothing}
      ${j.live ? html`<p class="prompt" data-testid="cal-prompt" aria-live="polite">${j.reason}</p>` : html`<p class="reason ${bad ? 'bad' : ''}" data-testid="cal-reason">${j.reason}</p>`}
      ${j.live
        ? html`<div class="row">
            ${j.state === 'placing'
              ? html`<button class="primary" data-testid="cal-placed" @click=${() => void this._send({ type: 'calibration_span_placed', step: j.step })}>
                  ${j.loads_kg[j.step] === 0 ? 'Cell is empty — measure' : `${j.loads_kg[j.step]} kg is on — measure`}
                </button>`
              : nothing}
            ${j.action !== 'tare' ? html`<button data-testid="cal-cancel" @click=${() => void this._send({ type: 'calibration_cancel' })}>Cancel</button>` : nothing}
            ${j.state === 'measuring' ? html`<span class="note">keep the bench still…</span>` : nothing}
          </div>`
        : nothing}
      ${j.readings.length
        ? html`<div class="scroll">
            <table class="compact" data-testid="cal-readings">
              <thead>
                <tr>
                  ${span ? html`<th>load (kg)</th>` : nothing}
                  <th>reference (${unit})</th>
                  <th>raw mean (${unit})</th>
                  <th>± std</th>
                  <th>n</th>
                  ${fit ? html`<th>residual (${unit})</th>` : nothing}
                </tr>
              </thead>
              <tbody>
                ${j.readings.map(
                  (r, i) => html`<tr>
                    ${span ? html`<td>${fmt(r.load_kg, 3)}</td>` : nothing}
                    <td>${fmt(r.reference, 4)}</td>
                    <td>${fmt(r.raw, 4)}</td>
                    <td>${fmt(r.std, 4)}</td>
                    <td>${r.n}</td>
                    ${fit ? html`<td>${fmt(fit.residuals[i], 4)}</td>` : nothing}
                  </tr>`,
                )}
              </tbody>
            </table>
          </div>`
        : nothing}
      ${fit
        ? html`<div class="fit" data-testid="cal-fit">
            <span>scale <strong>${fit.scale.toFixed(5)}</strong></span>
            <span>offset <strong>${fit.offset.toFixed(4)} ${unit}</strong></span>
            <span data-testid="cal-nonlinearity">non-linearity <strong>${fit.non_linearity_pct === null ? '— (two loads: add a third to check it)' : `${fit.non_linearity_pct.toFixed(3)} % of span`}</strong></span>
            <span>rms residual ${fit.rms.toFixed(4)} ${unit}</span>
            <span>r² ${fit.r2.toFixed(6)}</span>
            ${bad ? html`<span class="error">not applied</span>` : nothing}
          </div>`
        : j.entry && j.action !== 'span'
          ? html`<div class="fit" data-testid="cal-fit"><span>scale <strong>${j.entry.result.scale.toFixed(5)}</strong></span><span>offset <strong>${j.entry.result.offset.toFixed(4)}</strong></span></div>`
          : nothing}
    </div>`;
  }

  private _renderForms(blocked: string | null) {
    const off = blocked !== null;
    return html`<div class="grid">
      <section>
        <h3>Tare</h3>
        <p class="note">Zeroes the load cell in the firmware. Nothing on the cell, propeller still.</p>
        <div class="row"><button data-testid="cal-tare" ?disabled=${off} @click=${() => void this._send({ type: 'calibration_tare' })}>Tare the load cell</button></div>
      </section>
      <section>
        <h3>Load-cell span</h3>
        <p class="note">Known masses hung on the thrust axis, in kilograms. The empty cell is measured first; each mass is asked for in turn. With three or more loads the non-linearity is checked and an implausible fit is refused.</p>
        <div class="row">
          <label style="flex:1 1 9rem"
            >Masses (kg)<input type="text" data-testid="cal-masses" .value=${this._masses} @input=${(e: Event) => (this._masses = (e.target as HTMLInputElement).value)}
          /></label>
          <button class="primary" data-testid="cal-span-start" ?disabled=${off} @click=${() => this._startSpan()}>Start span</button>
        </div>
      </section>
      <section>
        <h3>Current sensor</h3>
        <p class="note">Zero: with nothing drawing current. Scale: pass a known current through the sensor (at least 0.5 A, e.g. a lab supply into a load resistor, motor disconnected) and type the meter's reading.</p>
        <div class="row"><button data-testid="cal-current-zero" ?disabled=${off} @click=${() => void this._send({ type: 'calibration_current_zero' })}>Zero the current sensor</button></div>
        <div class="row">
          <label>Meter reads (A)<input type="number" step="0.01" min="0" data-testid="cal-current-ref" .value=${this._amps} @input=${(e: Event) => (this._amps = (e.target as HTMLInputElement).value)} /></label>
          <button data-testid="cal-current-ref-go" ?disabled=${off} @click=${() => this._reference('current')}>Scale current</button>
        </div>
      </section>
      <section>
        <h3>Voltage</h3>
        <p class="note">Measure the supply at the bench with a multimeter and type its reading.</p>
        <div class="row">
          <label>Multimeter reads (V)<input type="number" step="0.01" min="0" data-testid="cal-voltage-ref" .value=${this._volts} @input=${(e: Event) => (this._volts = (e.target as HTMLInputElement).value)} /></label>
          <button data-testid="cal-voltage-ref-go" ?disabled=${off} @click=${() => this._reference('voltage')}>Scale voltage</button>
        </div>
      </section>
      <section>
        <h3>rpm pickup</h3>
        <p class="note">Pulses the pickup really gives per revolution (magnets, blades seen by an optical sensor) and what the firmware counts.</p>
        <div class="row">
          <label>Pickup gives<input type="number" min="1" max="64" step="1" data-testid="cal-rpm-actual" .value=${String(this._ppr.actual)} @change=${(e: Event) => (this._ppr = { ...this._ppr, actual: Number((e.target as HTMLInputElement).value) })} /></label>
          <label>Firmware counts<input type="number" min="1" max="64" step="1" data-testid="cal-rpm-firmware" .value=${String(this._ppr.firmware)} @change=${(e: Event) => (this._ppr = { ...this._ppr, firmware: Number((e.target as HTMLInputElement).value) })} /></label>
          <button data-testid="cal-rpm-go" ?disabled=${off} @click=${() => void this._send({ type: 'calibration_rpm_pulses', actual: this._ppr.actual, firmware: this._ppr.firmware })}>Set</button>
        </div>
      </section>
    </div>`;
  }

  private _renderInForce(s: CalibrationStatusView) {
    const rows = (Object.keys(s.in_force) as CalibrationEntryView['channel'][]).map((ch) => ({ ch, ...s.in_force[ch] }));
    return html`<table class="compact" data-testid="cal-in-force">
      <thead>
        <tr>
          <th class="left">channel</th>
          <th>scale</th>
          <th>offset</th>
        </tr>
      </thead>
      <tbody>
        ${rows.map(
          (r) => html`<tr>
            <td class="left">${r.ch}</td>
            <td>${r.scale.toFixed(5)}</td>
            <td>${r.ch === 'rpm' ? '—' : `${r.offset.toFixed(4)} ${CHANNEL_UNITS[r.ch]}`}</td>
          </tr>`,
        )}
      </tbody>
    </table>`;
  }

  private _renderHistory() {
    const h = this._dash.client?.calibrationHistory;
    if (!h || h.total === 0) return html`<p class="note" data-testid="cal-history-empty">No calibrations recorded yet.</p>`;
    const entries = [...h.entries].reverse();
    return html`<div class="scroll">
        <table data-testid="cal-history">
          <thead>
            <tr>
              <th class="left">date</th>
              <th class="left">channel</th>
              <th class="left">kind</th>
              <th>scale</th>
              <th>offset</th>
              <th>temperature</th>
              <th class="left">details</th>
            </tr>
          </thead>
          <tbody>
            ${entries.map(
              (e) => html`<tr>
                <td class="left">${fmtDate(e.at)}</td>
                <td class="left">${e.channel}</td>
                <td class="left">${e.kind.replace(/_/g, ' ')}</td>
                <td>${e.result.scale.toFixed(5)}</td>
                <td>${e.result.offset.toFixed(4)}</td>
                <td>${typeof e.temperatureC === 'number' ? `${e.temperatureC.toFixed(1)} °C` : '—'}</td>
                <td class="left wrap">${describeEntry(e)}</td>
              </tr>`,
            )}
          </tbody>
        </table>
      </div>
      ${h.total > h.entries.length ? html`<p class="note">Showing the latest ${h.entries.length} of ${h.total}.</p>` : nothing}`;
  }

  override render() {
    const c = this._dash.client;
    const s = c?.calibration ?? null;
    const job = s?.job ?? null;
    const blocked = calibrationBlocked(c);
    return html`
      <h2>Calibration</h2>
      ${s && s.warnings.length
        ? html`<ul class="warnings" data-testid="cal-warnings">
            ${s.warnings.map((w) => html`<li>${w}</li>`)}
          </ul>`
        : nothing}
      ${blocked && !(job?.live ?? false) ? html`<p class="blocked" data-testid="cal-blocked">${blocked}</p>` : nothing}
      ${job ? this._renderJob(job) : nothing}
      ${this._message ? html`<p class="error" data-testid="cal-message">${this._message}</p>` : nothing}
      ${job?.live ? nothing : this._renderForms(blocked)}
      ${s
        ? html`<h2>In force${s.temperature_C !== null ? html` <span class="muted">· temperature now ${s.temperature_C.toFixed(1)} °C</span>` : nothing}</h2>
            ${this._renderInForce(s)}`
        : nothing}
      <h2>History</h2>
      ${this._renderHistory()}
    `;
  }
}
customElements.define('db-calibration-panel', DbCalibrationPanel);

/** On the live bench: the calibration warnings, and a live calibration, with a way to the calibration view. */
export class DbCalibrationWarnings extends LitElement {
  static override styles = [
    panelStyles,
    css`
      :host {
        border-color: var(--db-warn);
        background: var(--db-warn-bg);
      }
      :host([hidden]) {
        display: none;
      }
      ul {
        margin: 0;
        padding-left: 1.1rem;
        color: var(--db-warn);
        font-size: 0.88rem;
        font-weight: 600;
      }
      button {
        margin-top: 0.5rem;
      }
    `,
  ];

  private readonly _dash = new DashboardController(this, ['connection', 'snapshot', 'extras']);

  override render() {
    const s = this._dash.client?.calibration ?? null;
    const live = s?.job?.live ?? false;
    const warnings = s?.warnings ?? [];
    this.hidden = !live && warnings.length === 0;
    if (this.hidden) return nothing;
    return html`<h2>Calibration</h2>
      ${live ? html`<p class="note" data-testid="cal-live-note"><strong>${ACTION_TITLES[s!.job!.action]} in progress:</strong> ${s!.job!.reason}</p>` : nothing}
      ${warnings.length
        ? html`<ul data-testid="cal-side-warnings">
            ${warnings.map((w) => html`<li>${w}</li>`)}
          </ul>`
        : nothing}
      <button data-testid="cal-open" @click=${() => this.dispatchEvent(new CustomEvent(OPEN_CALIBRATION, { bubbles: true, composed: true }))}>Open calibration</button>`;
  }
}
customElements.define('db-calibration-warnings', DbCalibrationWarnings);
