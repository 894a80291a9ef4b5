import { LitElement, css, html } from 'lit';
import { DashboardController } from '../data/context.js';

/**
 * The emergency stop: fixed to the viewport, so it is reachable at any scroll position and on any layout.
 * Enabled for everyone (viewers too: anyone may stop the motor) and whatever the connection looks like: if
 * the socket is down the press still tells the user, loudly, that the stop did not get through.
 */
export class DbStopButton extends LitElement {
  static override styles = css`
    :host {
      position: fixed;
      right: max(1rem, env(safe-area-inset-right));
      bottom: max(1rem, env(safe-area-inset-bottom));
      z-index: 1000;
      display: flex;
      flex-direction: column;
      align-items: stretch;
      gap: 0.35rem;
      /* The page reserves this width for the button (db-app's --db-stop-w): nothing is laid out under it. */
      width: var(--db-stop-w, 11.5rem);
    }
    button {
      font: inherit;
      display: flex;
      flex-direction: column;
      align-items: center;
      justify-content: center;
      min-height: 6rem;
      border-radius: 14px;
      border: 3px solid #7f1010;
      background: var(--db-stop);
      color: #fff;
      cursor: pointer;
      box-shadow: 0 6px 18px rgba(80, 0, 0, 0.35);
      touch-action: manipulation;
    }
    button:hover {
      background: var(--db-stop-hover);
    }
    button:active {
      transform: translateY(1px);
    }
    button:focus-visible {
      outline: 4px solid var(--db-focus);
      outline-offset: 2px;
    }
    .big {
      font-size: 2.1rem;
      font-weight: 800;
      letter-spacing: 0.12em;
    }
    .keys {
      font-size: 0.8rem;
      opacity: 0.9;
    }
    .status {
      font-size: 0.8rem;
      text-align: center;
      padding: 0.2rem 0.4rem;
      border-radius: 6px;
      background: var(--db-panel);
      border: 1px solid var(--db-line);
      color: var(--db-ink);
    }
    .status.bad {
      background: var(--db-danger);
      border-color: var(--db-danger);
      color: #fff;
      font-weight: 700;
    }
    @media (max-width: 640px) {
      button {
        min-height: 4.5rem;
      }
      .big {
        font-size: 1.6rem;
      }
      .status.hint {
        display: none;
      }
    }
  `;

  private readonly _dash = new DashboardController(this, ['command', 'connection']);
  /** A pointer press sends at once; the click that follows it must not send again. */
  private _lastPointerStop = -Infinity;

  private _stop(via: 'pointer' | 'click'): void {
    const now = performance.now();
    if (via === 'click' && now - this._lastPointerStop < 1000) return;
    if (via === 'pointer') this._lastPointerStop = now;
    void this._dash.client?.stop();
  }

  private _status() {
    const c = this._dash.client;
    const last = c?.lastCommand;
    if (!last || last.type !== 'stop') {
      return c && c.connection.state !== 'live' && c.connection.state !== 'syncing'
        ? html`<div class="status bad">not connected: use the hard-wired power cut</div>`
        : html`<div class="status hint">Space or Esc also stop</div>`;
    }
    if (last.result === null) return html`<div class="status">stop sent…</div>`;
    if (last.result.ok) return html`<div class="status">stop confirmed</div>`;
    return html`<div class="status bad">stop failed: ${last.result.error}. Cut the power.</div>`;
  }

  override render() {
    return html`
      <button
        type="button"
        aria-label="Emergency stop (Space or Escape)"
        data-testid="stop"
        @pointerdown=${(e: PointerEvent) => {
          if (e.button === 0) this._stop('pointer');
        }}
        @click=${() => this._stop('click')}
      >
        <span class="big">STOP</span><span class="keys">Space · Esc</span>
      </button>
      ${this._status()}
    `;
  }
}
customElements.define('db-stop-button', DbStopButton);
