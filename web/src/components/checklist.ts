import { LitElement, css, html } from 'lit';
import { CHECKLIST_ITEMS, type ChecklistItemId, type ChecklistView } from '../../../server/api/messages.js';
import { DashboardController } from '../data/context.js';
import { panelStyles } from './styles.js';

/** Asks the page to show the pre-arm checklist (db-app listens). */
export const NEED_CHECKLIST = 'db-need-checklist';

export function checklistConfirmed(extras: Readonly<Record<string, unknown>> | undefined): boolean {
  const c = extras?.checklist as ChecklistView | undefined;
  return c?.confirmed === true;
}

/** Limits worth a person's review, in the order and words an operator reads them. */
const LIMIT_LABELS: [string, string, string][] = [
  ['max_current_a', 'Bus current', 'A'],
  ['max_power_w', 'Electrical power', 'W'],
  ['max_thrust_n', 'Thrust', 'N'],
  ['max_rpm', 'Shaft speed', 'rpm'],
  ['max_temp_c', 'Motor temperature', '°C'],
  ['tip_mach_trip', 'Blade-tip Mach (trip)', ''],
  ['min_cell_v', 'Loaded cell voltage, at least', 'V'],
  ['cells', 'Cells in series (0: inferred)', ''],
  ['max_slew_per_s', 'Throttle rise, per second', ''],
  ['vibration_std_n', 'Thrust fluctuation', 'N'],
  ['deviation_trip_pct', 'Deviation from the model (trip)', '%'],
  ['stale_ms', 'Telemetry silence', 'ms'],
];

/**
 * The pre-arm checklist: every item ticked by a person, the limits in force shown for review, then one
 * confirmation to the daemon, which refuses arming from a dashboard until it has it. Not modal: the stop
 * button stays reachable above it.
 */
export class DbChecklist extends LitElement {
  static override styles = [
    panelStyles,
    css`
      :host {
        position: fixed;
        inset: 3rem 0 auto 0;
        margin: 0 auto;
        width: min(44rem, calc(100vw - 2rem));
        max-height: calc(100vh - 12rem);
        overflow: auto;
        z-index: 950;
        box-shadow: 0 12px 40px rgba(20, 30, 45, 0.35);
        border-color: var(--db-warn);
        border-width: 2px;
      }
      h2 {
        font-size: 1rem;
        color: var(--db-ink);
      }
      ul {
        list-style: none;
        padding: 0;
        margin: 0.4rem 0 0.8rem;
        display: grid;
        gap: 0.45rem;
      }
      label {
        display: flex;
        gap: 0.6rem;
        align-items: flex-start;
        cursor: pointer;
      }
      input[type='checkbox'] {
        width: 1.15rem;
        height: 1.15rem;
        margin-top: 0.1rem;
        flex: none;
      }
      .limits {
        display: grid;
        grid-template-columns: repeat(auto-fill, minmax(15rem, 1fr));
        gap: 0.15rem 1.2rem;
        font-size: 0.85rem;
        margin: 0.3rem 0 0.6rem;
        padding: 0.5rem 0.7rem;
        background: var(--db-bg);
        border-radius: 6px;
      }
      .limits div {
        display: flex;
        justify-content: space-between;
        gap: 0.6rem;
      }
      .limits span:last-child {
        font-variant-numeric: tabular-nums;
        font-weight: 600;
      }
      .actions {
        display: flex;
        gap: 0.6rem;
        align-items: center;
        flex-wrap: wrap;
        margin-top: 0.6rem;
      }
      button.confirm:not(:disabled) {
        background: var(--db-warn-bg);
        border-color: var(--db-warn);
      }
    `,
  ];

  static override properties = { _ticked: { state: true }, _error: { state: true }, _busy: { state: true } };
  declare _ticked: Set<ChecklistItemId>;
  declare _error: string;
  declare _busy: boolean;

  private readonly _dash = new DashboardController(this, ['snapshot', 'extras', 'connection']);

  constructor() {
    super();
    this._ticked = new Set();
    this._error = '';
    this._busy = false;
  }

  private _toggle(id: ChecklistItemId, on: boolean): void {
    const next = new Set(this._ticked);
    if (on) next.add(id);
    else next.delete(id);
    this._ticked = next;
  }

  private async _confirm(): Promise<void> {
    const c = this._dash.client;
    if (!c) return;
    this._busy = true;
    this._error = '';
    const r = await c.send({ type: 'checklist', items: CHECKLIST_ITEMS.map((i) => i.id).filter((id) => this._ticked.has(id)) });
    this._busy = false;
    if (r.ok) this._close();
    else this._error = r.error;
  }

  private _close(): void {
    this.dispatchEvent(new CustomEvent('db-close', { bubbles: true, composed: true }));
  }

  override render() {
    const c = this._dash.client;
    const limits = (c?.extras.limits ?? null) as Record<string, number> | null;
    const all = CHECKLIST_ITEMS.every((i) => this._ticked.has(i.id));
    return html`
      <section role="dialog" aria-modal="false" aria-labelledby="cl-title" data-testid="checklist">
        <h2 id="cl-title">Before the first arm: pre-arm checklist</h2>
        <p class="note">Tick each item only after checking it on the bench. Local codes and your lab's rules come first where they ask for more.</p>
        <ul>
          ${CHECKLIST_ITEMS.map(
            (i) => html`<li>
              <label
                ><input
                  type="checkbox"
                  data-testid=${`check-${i.id}`}
                  .checked=${this._ticked.has(i.id)}
                  @change=${(e: Event) => this._toggle(i.id, (e.target as HTMLInputElement).checked)}
                /><span>${i.text}</span></label
              >
            </li>`,
          )}
        </ul>
        <h2>Limits in force</h2>
        ${limits
          ? html`<div class="limits" data-testid="checklist-limits">
              ${LIMIT_LABELS.filter(([k]) => typeof limits[k] === 'number').map(
                ([k, label, unit]) => html`<div><span>${label}</span><span>${limits[k]}${unit ? ` ${unit}` : ''}</span></div>`,
              )}
            </div>`
          : html`<p class="note">The daemon has not sent its limits: review them in the rig file.</p>`}
        <p class="note">
          The software stop, the interlocks and the firmware's heartbeat cut-off are layers on top of a hard-wired power cut in the supply line, not
          instead of it.
        </p>
        <div class="actions">
          <button class="confirm" data-testid="checklist-confirm" ?disabled=${!all || this._busy || !c?.canControl} @click=${() => void this._confirm()}>
            All checked: confirm
          </button>
          <button data-testid="checklist-cancel" @click=${() => this._close()}>Not now</button>
          ${this._error ? html`<span class="error">${this._error}</span>` : ''}
        </div>
      </section>
    `;
  }
}
customElements.define('db-checklist', DbChecklist);
