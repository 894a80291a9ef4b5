import { LitElement, html } from 'lit';
import { DashboardController } from '../data/context.js';
import { panelStyles } from './styles.js';
import { benchTone, connectionTone, fmtAgo, fmtClock, fmtPercent, linkTone } from './format.js';

/** Connection to the daemon, the bench's state and the serial link's health, with the latest events. */
export class DbBenchStatus extends LitElement {
  static override styles = panelStyles;

  private readonly _dash = new DashboardController(this, ['connection', 'snapshot', 'bench', 'link', 'events']);
  /** Ticks the countdowns and "x s ago" texts once a second (they change without any message arriving). */
  private _tick: ReturnType<typeof setInterval> | null = null;

  override connectedCallback(): void {
    super.connectedCallback();
    this._tick = setInterval(() => this.requestUpdate(), 1000);
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    if (this._tick !== null) clearInterval(this._tick);
    this._tick = null;
  }

  override render() {
    const c = this._dash.client;
    if (!c) return html`<h2>Bench</h2><p class="error">internal error: no data layer</p>`;
    const conn = c.connection;
    const now = Date.now();
    const retryS = conn.state === 'waiting' && conn.retryAt !== null ? Math.max(0, Math.ceil((conn.retryAt - now) / 1000)) : null;
    const b = c.bench;
    const l = c.link;
    const bad = l ? Object.entries(l.linesBad).filter(([, n]) => n > 0) : [];
    const badTotal = bad.reduce((s, [, n]) => s + n, 0);
    const events = c.events.slice(-6).reverse();
    const stale = conn.state !== 'live';
    return html`
      <h2>Connection</h2>
      <p data-testid="connection" data-state=${conn.state}>
        <span class="badge ${connectionTone(conn.state)}">${conn.state.replace('_', ' ')}</span>
        <span class=${conn.state === 'refused' || conn.state === 'no_token' ? 'error' : ''}>${conn.state === 'live' ? '' : conn.reason}</span>
        ${retryS !== null ? html`<span class="muted">— retry in ${retryS} s</span>` : ''}
      </p>
      ${conn.state === 'live' ? html`<p class="note">Role: ${c.role}</p>` : ''}

      <h2>Bench${stale && b ? html` <span class="muted">(last known)</span>` : ''}</h2>
      ${b
        ? html`<dl>
            <dt>State</dt>
            <dd><span class="badge ${benchTone(b.state)}" data-testid="bench-state">${b.state}</span></dd>
            <dt>Why</dt>
            <dd>${b.reason || '—'}</dd>
            <dt>Since</dt>
            <dd>${fmtAgo(b.since, now)}</dd>
            ${b.fault !== 'none' ? html`<dt>Fault</dt><dd class="error">${b.fault} (latched: clear it to re-arm)</dd>` : ''}
            <dt>Throttle</dt>
            <dd>commanded ${fmtPercent(b.throttleCommand)}, output ${fmtPercent(b.throttleOutput)}</dd>
            <dt>Ceiling</dt>
            <dd>${b.ceiling > 0 ? fmtPercent(b.ceiling, 0) : 'not announced yet'}</dd>
          </dl>`
        : html`<p class="muted">no bench state yet</p>`}

      <h2>Serial link</h2>
      ${l
        ? html`<dl>
            <dt>Status</dt>
            <dd>
              <span class="badge ${linkTone(l.status)}">${l.status}</span>
              ${l.retryInMs !== null ? html`<span class="muted">retry in ${Math.ceil(l.retryInMs / 1000)} s</span>` : ''}
            </dd>
            <dt>Source</dt>
            <dd>${l.source || '—'}</dd>
            ${l.error ? html`<dt>Error</dt><dd class="error">${l.error.message} (${l.error.kind})</dd>` : ''}
            <dt>Lines</dt>
            <dd>
              ${l.linesOk} good, ${badTotal} bad${bad.length ? html` <span class="muted">(${bad.map(([k, n]) => `${k} ${n}`).join(', ')})</span>` : ''}
            </dd>
            <dt>Gaps</dt>
            <dd>${l.seqGaps} missing by sequence</dd>
            <dt>Writes</dt>
            <dd>${l.writeDropped} dropped</dd>
            <dt>Reconnects</dt>
            <dd>${l.reconnects}</dd>
          </dl>`
        : html`<p class="muted">no link state yet</p>`}

      <h2>Events</h2>
      ${events.length
        ? html`<ul style="margin:0;padding-left:1rem;font-size:0.85rem">
            ${events.map(
              (e) => html`<li class=${e.level === 'error' ? 'error' : ''}><span class="muted">${fmtClock(e.t)}</span> ${e.text}</li>`,
            )}
          </ul>`
        : html`<p class="muted">none</p>`}
    `;
  }
}
customElements.define('db-bench-status', DbBenchStatus);
