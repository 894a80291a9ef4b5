import { LitElement, css, html } from 'lit';
import { DashboardController } from '../data/context.js';
import { THRUST_UNITS, TIME_WINDOWS_S, type ThrustUnit, type TimeWindowS } from '../data/units.js';

/** Thrust unit and chart window; both are remembered in localStorage. */
export class DbViewOptions extends LitElement {
  static override styles = css`
    :host {
      display: flex;
      gap: 1rem;
      align-items: center;
      flex-wrap: wrap;
      font-size: 0.9rem;
    }
    fieldset {
      border: none;
      margin: 0;
      padding: 0;
      display: flex;
      align-items: center;
      gap: 0.3rem;
    }
    legend {
      float: left;
      margin-right: 0.4rem;
      color: var(--db-muted);
    }
    button {
      font: inherit;
      padding: 0.25rem 0.6rem;
      border: 1px solid var(--db-line-strong);
      background: var(--db-panel);
      color: var(--db-ink);
      border-radius: 6px;
      cursor: pointer;
    }
    button[aria-pressed='true'] {
      background: var(--db-accent);
      border-color: var(--db-accent);
      color: #fff;
    }
    button:focus-visible {
      outline: 3px solid var(--db-focus);
      outline-offset: 1px;
    }
  `;

  private readonly _dash = new DashboardController(this, []);

  override render() {
    const p = this._dash.prefs;
    if (!p) return html``;
    const unitLabel: Record<ThrustUnit, string> = { N: 'N', gf: 'gf' };
    return html`
      <fieldset>
        <legend>Thrust in</legend>
        ${THRUST_UNITS.map(
          (u) => html`<button type="button" data-testid="unit-${u}" aria-pressed=${p.thrustUnit === u} @click=${() => p.set({ thrustUnit: u })}>
            ${unitLabel[u]}
          </button>`,
        )}
      </fieldset>
      <fieldset>
        <legend>Window</legend>
        ${TIME_WINDOWS_S.map(
          (w: TimeWindowS) => html`<button type="button" data-testid="window-${w}" aria-pressed=${p.windowS === w} @click=${() => p.set({ windowS: w })}>
            ${w < 60 ? `${w} s` : `${w / 60} min`}
          </button>`,
        )}
      </fieldset>
    `;
  }
}
customElements.define('db-view-options', DbViewOptions);
