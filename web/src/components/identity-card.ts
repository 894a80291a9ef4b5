import { LitElement, html } from 'lit';
import { DashboardController } from '../data/context.js';
import { panelStyles } from './styles.js';
import { fmtPercent } from './format.js';
import { airAndRig } from './efficiency-chart.js';

/** What the device said about itself in the handshake. */
export class DbIdentityCard extends LitElement {
  static override styles = panelStyles;

  private readonly _dash = new DashboardController(this, ['snapshot', 'identity', 'extras']);

  private _bench() {
    const a = airAndRig(this._dash.client?.extras);
    return html`<dl data-testid="bench-context">
      <dt>Rig</dt>
      <dd data-testid="rig-name">${a.rig ?? 'none described'}</dd>
      <dt>Air density</dt>
      <dd data-testid="air-density">${a.density === null ? '—' : `${a.density.toFixed(3)} kg/m³`}${a.source ? html` <span class="muted">(${a.source})</span>` : ''}</dd>
    </dl>`;
  }

  override render() {
    const id = this._dash.client?.identity ?? null;
    if (!id) return html`<h2>Device</h2><p class="muted">no device identified (yet)</p>${this._bench()}`;
    const channels = Object.entries(id.channels);
    return html`
      <h2>Device</h2>
      <dl data-testid="identity">
        <dt>Firmware</dt>
        <dd>${id.firmware} ${id.firmwareVersion}</dd>
        <dt>Protocol</dt>
        <dd>v${id.protocol}</dd>
        <dt>Channels</dt>
        <dd>${channels.length ? channels.map(([k, hz]) => `${k} ${hz} Hz`).join(', ') : '—'}</dd>
        <dt>Ceiling</dt>
        <dd>${fmtPercent(id.throttleCeiling, 0)}</dd>
        <dt>Heartbeat</dt>
        <dd>cut after ${id.heartbeatTimeoutMs} ms of silence</dd>
        ${id.escRateHz !== undefined ? html`<dt>ESC rate</dt><dd>${id.escRateHz} Hz</dd>` : ''}
      </dl>
      <h2>Bench</h2>
      ${this._bench()}
    `;
  }
}
customElements.define('db-identity-card', DbIdentityCard);
