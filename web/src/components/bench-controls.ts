import { LitElement, css, html } from 'lit';
import type { ClientMessageType } from '../../../server/api/messages.js';
import { DashboardController } from '../data/context.js';
import type { Command } from '../data/client.js';
import { panelStyles } from './styles.js';
import type { ThrottleRequest } from './throttle-control.js';
import './throttle-control.js';

/** Arm, disarm, tare, clear a latched fault, and the manual throttle. The stop button lives apart (always on screen). */
export class DbBenchControls extends LitElement {
  static override styles = [
    panelStyles,
    css`
      .buttons {
        display: flex;
        flex-wrap: wrap;
        gap: 0.5rem;
        margin-bottom: 0.8rem;
      }
      button.arm:not(:disabled) {
        border-color: var(--db-warn);
      }
      .note + .buttons {
        margin-top: 0.6rem;
      }
      .result {
        min-height: 1.2em;
      }
    `,
  ];

  private readonly _dash = new DashboardController(this, ['connection', 'snapshot', 'bench', 'command']);

  private _send(cmd: Command): void {
    void this._dash.client?.send(cmd);
  }

  override render() {
    const c = this._dash.client;
    const b = c?.bench ?? null;
    const can = c?.canControl ?? false;
    const state = b?.state;
    const armed = state === 'armed' || state === 'running';
    const last = c?.lastCommand;
    const labels: Partial<Record<ClientMessageType, string>> = { arm: 'Arm', disarm: 'Disarm', tare: 'Tare', clear: 'Clear fault', throttle: 'Throttle', stop: 'Stop' };
    return html`
      <h2>Controls</h2>
      ${c?.connection.state === 'live' && c.role === 'viewer'
        ? html`<p class="note" data-testid="viewer-note">
            You are a viewer: another dashboard holds the controls. The stop button still works.
          </p>`
        : ''}
      ${c?.connection.state !== 'live' ? html`<p class="note">Controls wait for a live connection.</p>` : ''}
      <div class="buttons">
        <button class="arm" data-testid="arm" ?disabled=${!can || state !== 'safe'} @click=${() => this._send({ type: 'arm' })}>Arm</button>
        <button data-testid="disarm" ?disabled=${!can || !armed} @click=${() => this._send({ type: 'disarm' })}>Disarm</button>
        <button data-testid="tare" ?disabled=${!can || state !== 'safe'} title="Zero the load cell (propeller still)" @click=${() => this._send({ type: 'tare' })}>
          Tare
        </button>
        <button data-testid="clear" ?disabled=${!can || state !== 'tripped'} @click=${() => this._send({ type: 'clear' })}>Clear fault</button>
      </div>
      <db-throttle-control
        ?disabled=${!can || !armed}
        .ceiling=${b?.ceiling ?? 0}
        .command=${b?.throttleCommand ?? 0}
        @db-throttle=${(e: CustomEvent<ThrottleRequest>) => this._send({ type: 'throttle', value: e.detail.value })}
      ></db-throttle-control>
      ${!armed && can ? html`<p class="note">Arm first to use the throttle.</p>` : ''}
      <p class="note result" data-testid="command-result">
        ${last && last.type !== 'stop'
          ? last.result === null
            ? `${labels[last.type] ?? last.type}: sent…`
            : last.result.ok
              ? `${labels[last.type] ?? last.type}: done`
              : html`<span class="error">${labels[last.type] ?? last.type} refused: ${last.result.error}</span>`
          : ''}
      </p>
    `;
  }
}
customElements.define('db-bench-controls', DbBenchControls);
