import { LitElement, css, html, nothing } from 'lit';
import type { ExampleSequence, RunPointView, SequenceIssueView, SequenceSource } from '../../../server/api/messages.js';
import { parseSequence, SequenceError } from '../../../server/sequence/schema.js';
import { planSequence } from '../../../server/sequence/plan.js';
import { DashboardController } from '../data/context.js';
import { thrustFactor } from '../data/units.js';
import { NEED_CHECKLIST, checklistConfirmed } from './checklist.js';
import { fmt, fmtPercent } from './format.js';
import { fieldStyles, panelStyles } from './styles.js';

type SourceKind = SequenceSource['kind'];

const PHASES: Record<string, string> = {
  idle: 'not started',
  preparing: 'arming',
  ramping: 'ramping to the step',
  settling: 'waiting for the readings to settle',
  measuring: 'measuring',
  cooling: 'cooling down',
  pausing: 'ramping down to pause',
  paused: 'paused (disarmed)',
  finishing: 'ramping down',
  aborting: 'aborting: ramping down',
  completed: 'completed',
  aborted: 'aborted',
  tripped: 'tripped',
  interrupted: 'interrupted',
};

const EXAMPLE_JSON = `{
  "name": "Fenmoor low sweep",
  "defaults": { "ramp_s": 1, "hold_s": 3, "window_s": 1 },
  "steps": [
    { "staircase": { "start": 0.2, "stop": 0.5, "step": 0.1 } }
  ]
}`;

/** Checks pasted text the way the daemon will (schema and expansion), for errors while typing. */
export function checkSequenceText(text: string): { issues: SequenceIssueView[]; steps: number | null } {
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    return { issues: [{ path: '', rule: `not valid JSON: ${(err as Error).message}` }], steps: null };
  }
  try {
    return { issues: [], steps: planSequence(parseSequence(value)).steps.length };
  } catch (err) {
    if (err instanceof SequenceError) return { issues: err.issues.map((i) => ({ path: i.path, rule: i.rule })), steps: null };
    return { issues: [{ path: '', rule: (err as Error).message }], steps: null };
  }
}

function fmtDuration(s: number | null | undefined): string {
  if (typeof s !== 'number' || !Number.isFinite(s)) return '—';
  const r = Math.max(0, Math.round(s));
  return r < 60 ? `${r} s` : `${Math.floor(r / 60)} min ${String(r % 60).padStart(2, '0')} s`;
}

/**
 * Guided sweeps from the dashboard: choose a shipped example, fill in a staircase or paste a sequence document;
 * the daemon checks it against the device ceiling and the rig before anything spins. While it runs: progress,
 * phase, time left, pause / resume / abort, and the operating points as they are measured.
 */
export class DbSequencePanel extends LitElement {
  static override styles = [
    panelStyles,
    fieldStyles,
    css`
      .tabs {
        display: flex;
        gap: 0.3rem;
        margin-bottom: 0.6rem;
      }
      .tabs button[aria-pressed='true'] {
        background: var(--db-accent);
        border-color: var(--db-accent);
        color: #fff;
      }
      .form {
        display: flex;
        flex-wrap: wrap;
        gap: 0.5rem 0.9rem;
        align-items: end;
      }
      input[type='number'] {
        width: 5.5rem;
      }
      textarea {
        width: 100%;
        min-height: 9rem;
        font-family: ui-monospace, 'DejaVu Sans Mono', monospace;
        font-size: 0.8rem;
      }
      .wide {
        flex: 1 1 100%;
      }
      .actions {
        display: flex;
        gap: 0.5rem;
        align-items: center;
        flex-wrap: wrap;
        margin-top: 0.6rem;
      }
      ul.issues {
        margin: 0.4rem 0 0;
        padding-left: 1.1rem;
        color: var(--db-danger);
        font-size: 0.85rem;
      }
      ul.issues code {
        font-weight: 700;
      }
      .run-head {
        display: flex;
        gap: 0.6rem 1rem;
        align-items: baseline;
        flex-wrap: wrap;
      }
      .bar {
        height: 0.75rem;
        border-radius: 999px;
        background: var(--db-line);
        overflow: hidden;
        margin: 0.5rem 0;
      }
      .bar > div {
        height: 100%;
        background: var(--db-accent);
        transition: none;
      }
      table {
        width: 100%;
        border-collapse: collapse;
        font-size: 0.85rem;
        font-variant-numeric: tabular-nums;
        margin-top: 0.6rem;
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
      .scroll {
        overflow-x: auto;
      }
      td.unsettled {
        color: var(--db-warn);
      }
      label.check {
        display: flex;
        align-items: center;
        gap: 0.4rem;
      }
    `,
  ];

  static override properties = {
    _kind: { state: true },
    _example: { state: true },
    _stair: { state: true },
    _text: { state: true },
    _title: { state: true },
    _tags: { state: true },
    _issues: { state: true },
    _message: { state: true },
    _busy: { state: true },
    _keepZero: { state: true },
  };
  declare _kind: SourceKind;
  declare _example: string;
  declare _stair: { start: number; stop: number; step: number; hold_s: number; window_s: number; ramp_s: number };
  declare _text: string;
  declare _title: string;
  declare _tags: string;
  declare _issues: SequenceIssueView[];
  declare _message: string;
  declare _busy: boolean;
  declare _keepZero: boolean;

  private readonly _dash = new DashboardController(this, ['snapshot', 'extras', 'run', 'connection', 'bench']);

  constructor() {
    super();
    this._kind = 'staircase';
    this._example = '';
    this._stair = { start: 20, stop: 60, step: 10, hold_s: 4, window_s: 1.5, ramp_s: 1 };
    this._text = EXAMPLE_JSON;
    this._title = '';
    this._tags = '';
    this._issues = [];
    this._message = '';
    this._busy = false;
    this._keepZero = false;
  }

  private _examples(): ExampleSequence[] {
    const e = this._dash.client?.extras.sequences;
    return Array.isArray(e) ? (e as ExampleSequence[]) : [];
  }

  private _source(): SequenceSource | null {
    switch (this._kind) {
      case 'example': {
        const name = this._example || this._examples()[0]?.name;
        return name ? { kind: 'example', name } : null;
      }
      case 'json':
        return { kind: 'json', text: this._text };
      case 'staircase': {
        // The form is in percent like the throttle control; the daemon takes fractions.
        const s = this._stair;
        return { kind: 'staircase', start: s.start / 100, stop: s.stop / 100, step: s.step / 100, hold_s: s.hold_s, window_s: s.window_s, ramp_s: s.ramp_s };
      }
    }
  }

  private async _submit(checkOnly: boolean): Promise<void> {
    const c = this._dash.client;
    const source = this._source();
    if (!c || !source) return;
    this._message = '';
    if (source.kind === 'json') {
      const local = checkSequenceText(source.text);
      this._issues = local.issues;
      if (local.issues.length) return;
    }
    if (!checkOnly && !checklistConfirmed(c.extras)) {
      this.dispatchEvent(new CustomEvent(NEED_CHECKLIST, { bubbles: true, composed: true }));
      return;
    }
    const tags = this._tags
      .split(',')
      .map((t) => t.trim())
      .filter((t) => t !== '');
    this._busy = true;
    const r = await c.send({
      type: 'sequence_start',
      source,
      ...(checkOnly ? { check_only: true } : {}),
      ...(this._title.trim() ? { title: this._title.trim() } : {}),
      ...(tags.length ? { tags } : {}),
      ...(this._keepZero && !checkOnly ? { keep_zero: true } : {}),
    });
    this._busy = false;
    if (r.ok) {
      this._issues = [];
      const d = r.data as { steps?: number; estimate_s?: number } | undefined;
      this._message = checkOnly && d ? `Accepted: ${d.steps} steps, about ${fmtDuration(d.estimate_s)}. Nothing was armed.` : '';
    } else {
      this._issues = r.issues ?? [];
      this._message = r.issues?.length ? 'Refused before anything was armed:' : `Refused: ${r.error}`;
    }
  }

  private _num(key: keyof DbSequencePanel['_stair'], label: string, unit: string, step: number) {
    return html`<label
      >${label} (${unit})<input
        type="number"
        data-testid=${`stair-${key}`}
        step=${step}
        .value=${String(this._stair[key])}
        @change=${(e: Event) => (this._stair = { ...this._stair, [key]: Number((e.target as HTMLInputElement).value) })}
    /></label>`;
  }

  private _renderForm(canControl: boolean) {
    const ex = this._examples();
    const jsonCheck = this._kind === 'json' ? checkSequenceText(this._text) : null;
    return html`
      <div class="tabs" role="group" aria-label="Sequence source">
        ${(['staircase', 'example', 'json'] as const).map(
          (k) => html`<button
            aria-pressed=${this._kind === k ? 'true' : 'false'}
            data-testid=${`seq-kind-${k}`}
            @click=${() => {
              this._kind = k;
              this._issues = [];
              this._message = '';
            }}
          >
            ${k === 'staircase' ? 'Staircase' : k === 'example' ? 'Example' : 'Paste JSON'}
          </button>`,
        )}
      </div>
      <div class="form">
        ${this._kind === 'staircase'
          ? html`${this._num('start', 'From', '%', 1)} ${this._num('stop', 'To', '%', 1)} ${this._num('step', 'Step', '%', 1)}
            ${this._num('ramp_s', 'Ramp', 's', 0.5)} ${this._num('hold_s', 'Settle at most', 's', 0.5)} ${this._num('window_s', 'Measure', 's', 0.1)}`
          : this._kind === 'example'
            ? html`<label class="wide"
                >Example sequence
                <select data-testid="seq-example" @change=${(e: Event) => (this._example = (e.target as HTMLSelectElement).value)}>
                  ${ex.map((e) => html`<option value=${e.name} ?selected=${(this._example || ex[0]?.name) === e.name}>${e.title} — ${e.steps} steps</option>`)}
                </select>
                <span>${ex.find((e) => e.name === (this._example || ex[0]?.name))?.description ?? ''}</span>
              </label>`
            : html`<label class="wide"
                >Sequence document (see the format in server/sequence/SCHEMA.md)
                <textarea
                  data-testid="seq-json"
                  spellcheck="false"
                  .value=${this._text}
                  @input=${(e: Event) => {
                    this._text = (e.target as HTMLTextAreaElement).value;
                    this._issues = [];
                    this._message = '';
                  }}
                ></textarea>
                <span data-testid="seq-json-status">${jsonCheck && jsonCheck.issues.length === 0 ? `valid: ${jsonCheck.steps} steps` : ''}</span>
              </label>`}
        <label>Title (optional)<input type="text" data-testid="seq-title" .value=${this._title} @input=${(e: Event) => (this._title = (e.target as HTMLInputElement).value)} /></label>
        <label>Tags, comma-separated<input type="text" data-testid="seq-tags" .value=${this._tags} @input=${(e: Event) => (this._tags = (e.target as HTMLInputElement).value)} /></label>
        <label class="wide check"
          ><input type="checkbox" data-testid="seq-keep-zero" .checked=${this._keepZero} @change=${(e: Event) => (this._keepZero = (e.target as HTMLInputElement).checked)} />
          Keep the earlier zero (do not zero the thrust at rest first; the session says so)</label
        >
      </div>
      <div class="actions">
        <button data-testid="seq-check" ?disabled=${!canControl || this._busy} @click=${() => void this._submit(true)}>Check</button>
        <button data-testid="seq-start" class="start" ?disabled=${!canControl || this._busy} @click=${() => void this._submit(false)}>Start sequence</button>
        <span class="note" data-testid="seq-message">${this._message}</span>
      </div>
      ${this._issues.length
        ? html`<ul class="issues" data-testid="seq-issues">
            ${this._issues.map((i) => html`<li>${i.path ? html`<code>${i.path}</code>: ` : nothing}${i.rule}</li>`)}
          </ul>`
        : nothing}
      ${jsonCheck && jsonCheck.issues.length && this._issues.length === 0
        ? html`<ul class="issues" data-testid="seq-json-issues">
            ${jsonCheck.issues.map((i) => html`<li>${i.path ? html`<code>${i.path}</code>: ` : nothing}${i.rule}</li>`)}
          </ul>`
        : nothing}
    `;
  }

  private _renderPoints(points: readonly RunPointView[]) {
    const unit = this._dash.prefs?.thrustUnit ?? 'N';
    const xf = thrustFactor(unit);
    return html`<div class="scroll">
      <table data-testid="run-points">
        <thead>
          <tr>
            <th>step</th>
            <th>throttle</th>
            <th>thrust (${unit})</th>
            <th>± std</th>
            <th>power (W)</th>
            <th>g/W</th>
            <th>FM</th>
            <th>predicted g/W</th>
            <th>deviation</th>
            <th title="the prediction's uncertainty band (two standard uncertainties)">band g/W</th>
          </tr>
        </thead>
        <tbody>
          ${points.map((p) => {
            const t = p.channels.thrust;
            return html`<tr>
              <td class=${p.settled ? '' : 'unsettled'} title=${p.settled ? 'settled' : 'measured without settling (hold time ran out)'}>${p.index + 1}${p.settled ? '' : ' *'}</td>
              <td>${fmtPercent(p.throttle, 0)}</td>
              <td>${fmt(t ? t.mean * xf : null, unit === 'gf' ? 0 : 2)}</td>
              <td>${fmt(t ? t.std * xf : null, unit === 'gf' ? 1 : 3)}</td>
              <td>${fmt(p.channels.power?.mean, 1)}</td>
              <td>${fmt(p.grams_per_watt, 2)}</td>
              <td>${fmt(p.figure_of_merit, 3)}</td>
              <td>${fmt(p.predicted?.grams_per_watt, 2)}</td>
              <td
                data-testid="point-deviation"
                data-within=${p.within_band === undefined || p.within_band === null ? '' : String(p.within_band)}
                class=${p.within_band === false ? 'unsettled' : ''}
                title=${p.within_band === false ? 'outside the prediction\'s band' : p.within_band ? 'inside the prediction\'s band' : ''}
              >
                ${p.deviation_pct === null ? '—' : `${p.deviation_pct > 0 ? '+' : ''}${fmt(p.deviation_pct, 1)} %`}
              </td>
              <td data-testid="point-band">${p.predicted?.grams_per_watt_lo !== undefined && p.predicted.grams_per_watt_hi !== undefined
                ? `${fmt(p.predicted.grams_per_watt_lo, 2)}–${Number.isFinite(p.predicted.grams_per_watt_hi) && p.predicted.grams_per_watt_hi !== null ? fmt(p.predicted.grams_per_watt_hi, 2) : '∞'}`
                : '—'}</td>
            </tr>`;
          })}
        </tbody>
      </table>
    </div>
    ${points.some((p) => !p.settled) ? html`<p class="note">* measured without settling: the hold time ran out first.</p>` : nothing}`;
  }

  override render() {
    const c = this._dash.client;
    const can = c?.canControl ?? false;
    const run = c?.run ?? null;
    const live = run?.live ?? false;
    const pr = run?.progress;
    const frac = pr ? (pr.remaining_s !== null && pr.elapsed_s + pr.remaining_s > 0 ? pr.elapsed_s / (pr.elapsed_s + pr.remaining_s) : pr.steps ? pr.points / pr.steps : 0) : 0;
    const shown = run && !live ? 1 : frac;
    return html`
      <h2>Sequence</h2>
      ${run
        ? html`<div data-testid="run" data-run=${String(run.run)} data-state=${run.state} data-live=${String(live)} data-points=${String(run.points.length)}>
            <div class="run-head">
              <strong>${run.name}</strong>
              <span class="badge ${live ? 'warn' : run.outcome === 'completed' ? 'good' : 'bad'}" data-testid="run-state">${PHASES[run.state] ?? run.state}</span>
              ${pr ? html`<span data-testid="run-step">step ${Math.min(pr.step, pr.steps)} of ${pr.steps}</span>` : nothing}
              ${live ? html`<span data-testid="run-left">${pr?.remaining_s === null ? 'time left: —' : `about ${fmtDuration(pr?.remaining_s)} left`}</span>` : nothing}
              ${run.session !== null ? html`<span class="muted">session ${run.session}</span>` : nothing}
            </div>
            <div class="bar" role="progressbar" aria-valuemin="0" aria-valuemax="100" aria-valuenow=${Math.round(shown * 100)} data-testid="run-progress">
              <div style="width:${(shown * 100).toFixed(1)}%"></div>
            </div>
            <p class="note">${run.reason}${pr && pr.target !== null && live ? ` · target ${fmtPercent(pr.target, 0)}, at ${fmtPercent(pr.throttle, 1)}` : ''}</p>
            ${live
              ? html`<div class="actions">
                  ${run.state === 'paused' || run.state === 'pausing'
                    ? html`<button data-testid="run-resume" ?disabled=${!can || run.state !== 'paused'} @click=${() => void c?.send({ type: 'sequence_resume' })}>Resume</button>`
                    : html`<button data-testid="run-pause" ?disabled=${!can} @click=${() => void c?.send({ type: 'sequence_pause' })}>Pause</button>`}
                  <button data-testid="run-abort" ?disabled=${!can} @click=${() => void c?.send({ type: 'sequence_abort' })}>Abort</button>
                  <span class="note">Pause and abort ramp down and disarm; the red stop cuts at once.</span>
                </div>`
              : nothing}
            ${run.points.length ? this._renderPoints(run.points) : nothing}
          </div>`
        : nothing}
      ${live ? nothing : html`${run ? html`<h2>Next sequence</h2>` : nothing}${this._renderForm(can)}`}
    `;
  }
}
customElements.define('db-sequence-panel', DbSequencePanel);

