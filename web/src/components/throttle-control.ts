import { LitElement, css, html } from 'lit';
import { panelStyles } from './styles.js';

export interface ThrottleRequest {
  /** Fraction 0..1, as the API takes it. */
  value: number;
}

/**
 * Manual throttle: a slider and a number in percent. Nothing is sent while dragging or typing: the slider
 * commits when released (its change event), the number when Enter is pressed or Set clicked. A value above
 * the device's ceiling is refused here with a message, never clamped (the daemon and the device refuse it
 * too). Fires `db-throttle` with the fraction; the parent sends it.
 */
export class DbThrottleControl extends LitElement {
  static override styles = [
    panelStyles,
    css`
      :host {
        border: none;
        padding: 0;
        background: none;
      }
      .row {
        display: flex;
        gap: 0.5rem;
        align-items: center;
        flex-wrap: wrap;
      }
      input[type='range'] {
        flex: 1 1 12rem;
        min-width: 8rem;
        accent-color: var(--db-accent);
        height: 2rem;
      }
      input[type='number'] {
        width: 5.5rem;
        font: inherit;
        padding: 0.35rem 0.4rem;
        border: 1px solid var(--db-line-strong);
        border-radius: 6px;
        font-variant-numeric: tabular-nums;
      }
      label {
        font-weight: 600;
        display: block;
        margin-bottom: 0.25rem;
      }
    `,
  ];

  static override properties = {
    disabled: { type: Boolean, reflect: true },
    ceiling: { type: Number },
    command: { type: Number },
    _draft: { state: true },
    _error: { state: true },
  };

  /** True unless armed and holding the controller role (the parent decides). */
  declare disabled: boolean;
  /** Device ceiling as a fraction; 0 while unknown (then 100 % is the slider's end). */
  declare ceiling: number;
  /** Throttle the host last commanded, fraction. */
  declare command: number;
  /** Percent being edited, or null to follow `command`. */
  declare _draft: number | null;
  declare _error: string;

  constructor() {
    super();
    this.disabled = true;
    this.ceiling = 0;
    this.command = 0;
    this._draft = null;
    this._error = '';
  }

  private get _maxPercent(): number {
    return this.ceiling > 0 ? Math.round(this.ceiling * 1000) / 10 : 100;
  }

  private _shown(): number {
    return this._draft ?? Math.round(this.command * 1000) / 10;
  }

  private _commit(percent: number): void {
    this._draft = null;
    if (!Number.isFinite(percent)) {
      this._error = 'enter a number';
      return;
    }
    if (percent < 0 || percent > this._maxPercent) {
      this._error = `${percent} % is outside 0 to ${this._maxPercent} % (the device's ceiling): not sent`;
      return;
    }
    this._error = '';
    this.dispatchEvent(new CustomEvent<ThrottleRequest>('db-throttle', { detail: { value: percent / 100 }, bubbles: true, composed: true }));
  }

  private _numberKey(e: KeyboardEvent): void {
    const input = e.target as HTMLInputElement;
    if (e.key === 'Enter') {
      e.preventDefault();
      this._commit(input.valueAsNumber);
    }
  }

  override render() {
    const shown = this._shown();
    return html`
      <label for="slider">Throttle <span class="muted">(${this._maxPercent} % ceiling)</span></label>
      <div class="row">
        <input
          id="slider"
          type="range"
          min="0"
          max=${this._maxPercent}
          step="0.5"
          .value=${String(shown)}
          ?disabled=${this.disabled}
          aria-label="Throttle percent (sent on release)"
          data-testid="throttle-slider"
          @input=${(e: Event) => (this._draft = (e.target as HTMLInputElement).valueAsNumber)}
          @change=${(e: Event) => this._commit((e.target as HTMLInputElement).valueAsNumber)}
        />
        <input
          type="number"
          min="0"
          max=${this._maxPercent}
          step="0.5"
          .value=${String(shown)}
          ?disabled=${this.disabled}
          aria-label="Throttle percent (Enter sends)"
          data-testid="throttle-number"
          @input=${(e: Event) => {
            const v = (e.target as HTMLInputElement).valueAsNumber;
            this._draft = Number.isFinite(v) ? v : this._draft;
          }}
          @keydown=${this._numberKey}
          @blur=${() => (this._draft = null)}
        />
        <span>%</span>
        <button
          type="button"
          ?disabled=${this.disabled}
          data-testid="throttle-set"
          @pointerdown=${(e: Event) => e.preventDefault() /* keep the number's focus so blur does not discard the draft */}
          @click=${() => this._commit(this._shown())}
        >
          Set
        </button>
      </div>
      ${this._error ? html`<p class="note error">${this._error}</p>` : ''}
    `;
  }
}
customElements.define('db-throttle-control', DbThrottleControl);
