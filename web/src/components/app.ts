import { LitElement, css, html } from 'lit';
import type { SampleChannel } from '../../../server/api/messages.js';
import { provideDashboard, type Dashboard } from '../data/context.js';
import { installStopKeys } from '../keys.js';
import './bench-controls.js';
import './bench-status.js';
import './caution-banner.js';
import './efficiency-chart.js';
import './identity-card.js';
import './live-chart.js';
import './readouts.js';
import './stop-button.js';
import './view-options.js';
import './checklist.js';
import './sequence-panel.js';
import './mount-panel.js';
import './sessions-view.js';
import './compare-view.js';
import './zero-status.js';
import { OPEN_CALIBRATION } from './calibration-panel.js';
import { NEED_CHECKLIST } from './checklist.js';

/** The three views of the page: the live bench, the recorded sessions, a comparison. */
export type AppView = 'bench' | 'sessions' | 'compare' | 'calibration';
const VIEW_LABELS: Record<AppView, string> = { bench: 'Live bench', sessions: 'Sessions', compare: 'Compare', calibration: 'Calibration' };

const LIVE_CHANNELS: SampleChannel[] = ['thrust', 'power', 'voltage', 'current', 'rpm'];

/**
 * The page: provides the dashboard's shared state to everything inside, owns the Space/Escape stop keys,
 * and lays the panels out. Reflects the connection state as data-connection for tests and styling.
 */
export class DbApp extends LitElement {
  static override styles = css`
    /*
     * The stop button is fixed to the bottom-right corner of the viewport, and nothing may ever be laid out
     * under it: on the bench view the side column (wider than the button, right above it) stays within the
     * viewport above the button's height and scrolls inside itself; every other page, and the one-column
     * layout, keeps a right gutter of the button's width. --db-banner-h and --db-stop-h are measured (the
     * caution banner wraps, the stop status line grows with its message).
     */
    :host {
      display: block;
      min-height: 100vh;
      background: var(--db-bg);
      color: var(--db-ink);
      --db-stop-w: 11.5rem;
      --db-stop-gutter: calc(var(--db-stop-w) + 2rem);
    }
    @media (max-width: 640px) {
      :host {
        --db-stop-w: 8.5rem;
      }
    }
    db-caution-banner {
      position: sticky;
      top: 0;
      z-index: 900;
    }
    header {
      display: flex;
      align-items: center;
      justify-content: space-between;
      flex-wrap: wrap;
      gap: 0.6rem 1.5rem;
      padding: 0.7rem 1rem 0.2rem;
    }
    h1 {
      margin: 0;
      font-size: 1.25rem;
      letter-spacing: 0.02em;
    }
    h1 small {
      font-weight: 400;
      color: var(--db-muted);
      font-size: 0.85rem;
      margin-left: 0.5rem;
    }
    .alert {
      margin: 0.5rem 1rem 0;
      padding: 0.6rem 0.9rem;
      border-radius: 8px;
      background: var(--db-danger-bg);
      color: var(--db-danger);
      border: 1px solid var(--db-danger);
      font-weight: 600;
    }
    .layout {
      display: grid;
      grid-template-columns: minmax(0, 1fr) minmax(17rem, 23rem);
      gap: 0.8rem;
      padding: 0.7rem 1rem;
      /* Room under the content so the fixed stop button never hides the last panel. */
      padding-bottom: 10rem;
      align-items: start;
    }
    .side {
      display: grid;
      gap: 0.8rem;
      position: sticky;
      /* Stuck where it starts, so its height never reaches down to the stop button at any scroll. */
      top: var(--db-side-top, 7rem);
      max-height: calc(100vh - var(--db-side-top, 7rem) - var(--db-stop-h, 9rem) - 1.8rem);
      overflow-y: auto;
    }
    .main {
      display: grid;
      gap: 0.8rem;
      min-width: 0;
    }
    .charts {
      display: grid;
      grid-template-columns: repeat(auto-fit, minmax(22rem, 1fr));
      gap: 0.8rem;
    }
    db-efficiency-chart {
      grid-column: 1 / -1;
    }
    nav {
      display: flex;
      gap: 0.3rem;
    }
    nav button {
      font: inherit;
      font-weight: 600;
      padding: 0.3rem 0.8rem;
      border: 1px solid var(--db-line-strong);
      background: var(--db-panel);
      color: var(--db-ink);
      border-radius: 6px;
      cursor: pointer;
    }
    nav button[aria-current='page'] {
      background: var(--db-ink);
      border-color: var(--db-ink);
      color: #fff;
    }
    .page {
      padding: 0.7rem var(--db-stop-gutter) 10rem 1rem;
    }
    [hidden] {
      display: none !important;
    }
    @media (max-width: 900px) {
      .layout {
        grid-template-columns: minmax(0, 1fr);
        padding-right: var(--db-stop-gutter);
      }
      .side {
        position: static;
        max-height: none;
        overflow: visible;
      }
      .charts {
        grid-template-columns: minmax(0, 1fr);
      }
    }
  `;

  static override properties = { dashboard: { attribute: false }, _view: { state: true }, _checklist: { state: true }, _compareIds: { state: true } };
  declare dashboard: Dashboard | null;
  declare _view: AppView;
  declare _checklist: boolean;
  declare _compareIds: number[];

  private _releaseProvider: (() => void) | null = null;
  private _releaseKeys: (() => void) | null = null;
  private _unsubscribe: (() => void) | null = null;
  /** Keeps --db-banner-h and --db-stop-h at the caution banner's and the stop button's heights. */
  private _sizes: ResizeObserver | null = null;

  constructor() {
    super();
    this.dashboard = null;
    this._view = 'bench';
    this._checklist = false;
    this._compareIds = [];
    this.addEventListener(NEED_CHECKLIST, () => (this._checklist = true));
    this.addEventListener('db-close', () => (this._checklist = false));
    this.addEventListener(OPEN_CALIBRATION, () => (this._view = 'calibration'));
    this.addEventListener('db-compare', (e) => {
      this._compareIds = (e as CustomEvent<number[]>).detail;
      this._view = 'compare';
    });
  }

  override connectedCallback(): void {
    super.connectedCallback();
    this._attach();
    this._releaseKeys = installStopKeys(document, () => void this.dashboard?.client.stop());
  }

  protected override firstUpdated(): void {
    this._sizes = new ResizeObserver(() => this._measure());
    for (const sel of ['db-caution-banner', 'db-stop-button', 'header']) {
      const el = this.renderRoot.querySelector(sel);
      if (el) this._sizes.observe(el);
    }
    this._measure();
  }

  private _measure(): void {
    const h = (sel: string) => (this.renderRoot.querySelector(sel) as HTMLElement | null)?.getBoundingClientRect().height ?? 0;
    this.style.setProperty('--db-banner-h', `${Math.ceil(h('db-caution-banner'))}px`);
    this.style.setProperty('--db-stop-h', `${Math.ceil(h('db-stop-button'))}px`);
    // Where the side column starts in the page (below the banner, the header and any alert), plus the layout's
    // own top padding: it sticks there.
    const layout = this.renderRoot.querySelector('.layout') as HTMLElement | null;
    const side = this.renderRoot.querySelector('.side') as HTMLElement | null;
    if (layout && side && !layout.hidden) {
      const pad = parseFloat(getComputedStyle(layout).paddingTop) || 0;
      this.style.setProperty('--db-side-top', `${Math.ceil(layout.getBoundingClientRect().top + window.scrollY + pad)}px`);
    }
  }

  protected override updated(): void {
    // An alert or the checklist above the layout moves the side column down.
    this._measure();
  }

  override disconnectedCallback(): void {
    super.disconnectedCallback();
    this._sizes?.disconnect();
    this._sizes = null;
    this._releaseKeys?.();
    this._releaseKeys = null;
    this._detach();
  }

  protected override willUpdate(changed: Map<PropertyKey, unknown>): void {
    if (changed.has('dashboard') && this.isConnected) this._attach();
  }

  private _attach(): void {
    this._detach();
    const d = this.dashboard;
    if (!d) return;
    this._releaseProvider = provideDashboard(this, d);
    this._unsubscribe = d.client.subscribe((c) => {
      if (c === 'connection' || c === 'snapshot') {
        this.dataset.connection = d.client.connection.state;
        this.dataset.role = d.client.role;
        this.requestUpdate();
      }
    });
    this.dataset.connection = d.client.connection.state;
  }

  private _detach(): void {
    this._releaseProvider?.();
    this._releaseProvider = null;
    this._unsubscribe?.();
    this._unsubscribe = null;
  }

  override render() {
    const d = this.dashboard;
    if (!d) return html``;
    const conn = d.client.connection;
    const blocking = conn.state === 'refused' || conn.state === 'no_token' || conn.state === 'waiting';
    return html`
      <db-caution-banner></db-caution-banner>
      <header>
        <h1>ductbench <small>${VIEW_LABELS[this._view].toLowerCase()}</small></h1>
        <nav aria-label="Views">
          ${(Object.keys(VIEW_LABELS) as AppView[]).map(
            (v) => html`<button data-testid=${`view-${v}`} aria-current=${this._view === v ? 'page' : 'false'} @click=${() => (this._view = v)}>${VIEW_LABELS[v]}</button>`,
          )}
        </nav>
        <db-view-options></db-view-options>
      </header>
      ${blocking ? html`<div class="alert" role="alert" data-testid="connection-alert">${conn.reason}</div>` : ''}
      ${this._checklist ? html`<db-checklist></db-checklist>` : ''}
      ${this._view === 'sessions' ? html`<div class="page"><db-sessions-view></db-sessions-view></div>` : ''}
      ${this._view === 'compare' ? html`<div class="page"><db-compare-view .ids=${this._compareIds}></db-compare-view></div>` : ''}
      ${this._view === 'calibration' ? html`<div class="page"><db-calibration-panel></db-calibration-panel></div>` : ''}
      <div class="layout" ?hidden=${this._view !== 'bench'}>
        <div class="main">
          <db-readouts></db-readouts>
          <db-sequence-panel></db-sequence-panel>
          <div class="charts">
            <db-efficiency-chart></db-efficiency-chart>
            ${LIVE_CHANNELS.map((ch) => html`<db-live-chart channel=${ch}></db-live-chart>`)}
          </div>
        </div>
        <div class="side">
          <db-calibration-warnings></db-calibration-warnings>
          <db-bench-controls></db-bench-controls>
          <db-zero-status></db-zero-status>
          <db-mount-panel></db-mount-panel>
          <db-bench-status></db-bench-status>
          <db-identity-card></db-identity-card>
        </div>
      </div>
      <db-stop-button></db-stop-button>
    `;
  }
}
customElements.define('db-app', DbApp);
