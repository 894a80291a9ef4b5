import { LitElement, css, html } from 'lit';
import type { ClientMessageType } from '../../../server/api/messages.js';
import { DashboardController } from '../data/context.js';
import type { Command } from '../data/client.js';
import { panelStyles } from './styles.js';
import { NEED_CHECKLIST, checklistConfirmed } from './checklist.js';
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
      .keep-zero {
        display: flex;
        align-items: center;
        gap: 0.4rem;
        margin: 0 0 0.6rem;
      }
    `,
  ];

  private readonly _dash = new DashboardController(this, ['connection', 'snapshot', 'bench', 'command', 'extras', 'run', 'role']);

  /** Arm, or first the checklist when this daemon session has not had it (the daemon would refuse). */
  private _arm(): void {
    if (!checklistConfirmed(this._dash.client?.extras)) {
      this.dispatchEvent(new CustomEvent(NEED_CHECKLIST, { bubbles: true, composed: true }));
      return;
    }
    this._send({ type: 'arm', ...(this._keepZero ? { keep_zero: true } : {}) });
  }

  /** Arm without zeroing first (the daemon zeroes before every arm unless told to keep the earlier zero). */
  private _keepZero = false;

  private _send(cmd: Command): void {
    void this._dash.client?.send(cmd);
  }

  override render() {
    const c = this._dash.client;
    const b = c?.bench ?? null;
    const can = c?.canControl ?? false;
    const state = b?.state;
    const armed = state === 'armed' || state === 'running';
    const confirmed = checklistConfirmed(c?.extras);
    // While a sequence runs it owns the throttle: the manual controls stand aside (stop still works).
    const runLive = c?.run?.live ?? false;
    const last = c?.lastCommand;
    const labels: Partial<Record<ClientMessageType, string>> = {
      arm: 'Arm',
      disarm: 'Disarm',
      tare: 'Tare',
      clear: 'Clear fault',
      throttle: 'Throttle',
      stop: 'Stop',
      checklist: 'Checklist',
      sequence_start: 'Sequence',
      sequence_pause: 'Pause',
      sequence_resume: 'Resume',
      sequence_abort: 'Abort',
    };
    return html`
      <h2>Controls</h2>
      ${c?.connection.state === 'live' && c.role === 'viewer'
        ? html`<p class="note" data-testid="viewer-note">
              You are a viewer: another dashboard holds the controls. The stop button still works.
            </p>
            <div class="buttons">
              <button data-testid="request-control" @click=${() => void c.requestTakeover()}>Ask for control</button>
            </div>`
        : ''}
      ${c?.takeoverAsked
        ? html`<div class="note" role="alertdialog" data-testid="takeover-asked">
            Another dashboard asks to take control of the bench. The motor is not touched by a handover.
            <div class="buttons">
              <button data-testid="takeover-allow" @click=${() => void c.answerTakeover(true)}>Hand over</button>
              <button data-testid="takeover-deny" @click=${() => void c.answerTakeover(false)}>Keep control</button>
            </div>
          </div>`
        : ''}
      ${c?.connection.state !== 'live' ? html`<p class="note">Controls wait for a live connection.</p>` : ''}
      <div class="buttons">
        <button class="arm" data-testid="arm" ?disabled=${!can || state !== 'safe' || runLive} @click=${() => this._arm()}>
          ${confirmed ? 'Arm' : 'Arm…'}
        </button>
        <button data-testid="disarm" ?disabled=${!can || !armed || runLive} @click=${() => this._send({ type: 'disarm' })}>Disarm</button>
        <button data-testid="tare" ?disabled=${!can || state !== 'safe'} title="Zero the load cell (propeller still)" @click=${() => this._send({ type: 'tare' })}>
          Tare
        </button>
        <button data-testid="clear" ?disabled=${!can || state !== 'tripped'} @click=${() => this._send({ type: 'clear' })}>Clear fault</button>
      </div>
      <label class="note keep-zero"
        ><input type="checkbox" data-testid="arm-keep-zero" ?disabled=${!can} @change=${(e: Event) => (this._keepZero = (e.target as HTMLInputElement).checked)} /> Arm
        keeping the earlier zero (no zero step)</label
      >
      ${can && !confirmed
        ? html`<p class="note" data-testid="checklist-note">Arming opens the pre-arm checklist first (once per daemon session).</p>`
        : ''}
      ${runLive ? html`<p class="note">A sequence is running: it holds the throttle. Abort it in the sequence panel, or stop.</p>` : ''}
      <db-throttle-control
        ?disabled=${!can || !armed || runLive}
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
