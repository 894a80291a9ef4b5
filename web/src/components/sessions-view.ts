import { LitElement, css, html, nothing } from 'lit';
import type { SampleBatch } from '../../../server/api/messages.js';
import type { SessionRecord, SessionSummary } from '../../../server/store/types.js';
import { saveBlob, type SessionQuery } from '../data/api.js';
import { DashboardController } from '../data/context.js';
import { fmt, fmtPercent } from './format.js';
import { fieldStyles, panelStyles } from './styles.js';
import type { XySpec } from './xy-chart.js';
import './xy-chart.js';

const OUTCOMES = ['', 'completed', 'aborted', 'tripped', 'interrupted', 'running'];
const G0 = 9.80665;

export const tableStyles = css`
  table {
    width: 100%;
    border-collapse: collapse;
    font-size: 0.85rem;
    font-variant-numeric: tabular-nums;
  }
  th,
  td {
    text-align: left;
    padding: 0.25rem 0.45rem;
    border-bottom: 1px solid var(--db-line);
    vertical-align: top;
  }
  th {
    color: var(--db-muted);
    font-weight: 600;
    font-size: 0.78rem;
  }
  td.num,
  th.num {
    text-align: right;
    white-space: nowrap;
  }
  .scroll {
    overflow-x: auto;
  }
  .filters,
  .row {
    display: flex;
    flex-wrap: wrap;
    gap: 0.5rem 0.8rem;
    align-items: end;
    margin-bottom: 0.6rem;
  }
  textarea {
    width: 100%;
    min-height: 4rem;
  }
  a.open,
  button.link {
    color: var(--db-accent);
    cursor: pointer;
    background: none;
    border: none;
    padding: 0;
    font: inherit;
    font-weight: 600;
    text-align: left;
  }
  .tag {
    display: inline-block;
    font-size: 0.75rem;
    padding: 0 0.45rem;
    margin: 0 0.2rem 0.1rem 0;
    border-radius: 999px;
    background: var(--db-bg);
    border: 1px solid var(--db-line);
  }
  .charts {
    display: grid;
    grid-template-columns: repeat(auto-fit, minmax(22rem, 1fr));
    gap: 0.8rem;
    margin: 0.8rem 0;
  }
`;

export function outcomeTone(o: string): string {
  return o === 'completed' ? 'good' : o === 'running' ? 'warn' : 'bad';
}

function when(ms: number | null): string {
  if (ms === null) return '—';
  const d = new Date(ms);
  return `${d.toLocaleDateString(undefined, { year: 'numeric', month: 'short', day: 'numeric' })} ${d.toLocaleTimeString(undefined, { hour12: false, hour: '2-digit', minute: '2-digit' })}`;
}

/** Seconds from the first sample, for plots of one session. */
function seriesOf(b: SampleBatch, ch: 'thrust' | 'power' | 'current' | 'voltage'): { x: number[]; y: (number | null)[] } {
  const t0 = b.t[0] ?? 0;
  const x: number[] = [];
  const y: (number | null)[] = [];
  for (let i = 0; i < b.t.length; i++) {
    const v = b[ch][i];
    if (v === null) continue;
    x.push((b.t[i] - t0) / 1000);
    y.push(v);
  }
  return { x, y };
}

/**
 * Recorded sessions: a searchable list (text, tag, rig, outcome, date range), one session opened with its
 * plots, operating points and events, edits to title, notes and tags, delete with a confirmation, downloads,
 * and a pick of sessions to compare.
 */
export class DbSessionsView extends LitElement {
  static override styles = [panelStyles, fieldStyles, tableStyles];

  static override properties = {
    _q: { state: true },
    _list: { state: true },
    _error: { state: true },
    _picked: { state: true },
    _open: { state: true },
    _samples: { state: true },
    _edit: { state: true },
    _confirmDelete: { state: true },
    _note: { state: true },
  };
  declare _q: SessionQuery;
  declare _list: SessionSummary[] | null;
  declare _error: string;
  declare _picked: number[];
  declare _open: SessionRecord | null;
  declare _samples: SampleBatch | null;
  declare _edit: { title: string; notes: string; tags: string } | null;
  declare _confirmDelete: boolean;
  declare _note: string;

  private readonly _dash = new DashboardController(this, ['run']);

  constructor() {
    super();
    this._q = {};
    this._list = null;
    this._error = '';
    this._picked = [];
    this._open = null;
    this._samples = null;
    this._edit = null;
    this._confirmDelete = false;
    this._note = '';
  }

  override connectedCallback(): void {
    super.connectedCallback();
    void this.refresh();
  }

  /** Reloads the list with the current filters. */
  async refresh(): Promise<void> {
    const api = this._dash.dashboard?.api;
    if (!api) {
      this._error = 'no token: the sessions cannot be fetched';
      return;
    }
    const r = await api.list(this._q);
    if (r.ok) {
      this._list = r.value;
      this._error = '';
    } else this._error = r.field ? `${r.field}: ${r.error}` : r.error;
  }

  private async _openSession(id: number): Promise<void> {
    const api = this._dash.dashboard?.api;
    if (!api) return;
    this._confirmDelete = false;
    this._note = '';
    const [s, b] = await Promise.all([api.get(id), api.samples(id, 1500)]);
    if (!s.ok) {
      this._error = s.error;
      return;
    }
    this._open = s.value;
    this._samples = b.ok ? b.value : null;
    this._edit = { title: s.value.title, notes: s.value.notes, tags: s.value.tags.join(', ') };
  }

  private async _save(): Promise<void> {
    const api = this._dash.dashboard?.api;
    const s = this._open;
    if (!api || !s || !this._edit) return;
    const tags = this._edit.tags
      .split(',')
      .map((t) => t.trim())
      .filter((t) => t !== '');
    const r = await api.edit(s.id, { title: this._edit.title, notes: this._edit.notes, tags });
    if (!r.ok) {
      this._note = `not saved: ${r.error}`;
      return;
    }
    this._open = { ...s, ...r.value };
    this._note = 'saved';
    void this.refresh();
  }

  private async _delete(): Promise<void> {
    const api = this._dash.dashboard?.api;
    const s = this._open;
    if (!api || !s) return;
    const r = await api.remove(s.id);
    if (!r.ok) {
      this._note = `not deleted: ${r.error}`;
      this._confirmDelete = false;
      return;
    }
    this._open = null;
    this._picked = this._picked.filter((id) => id !== s.id);
    void this.refresh();
  }

  private async _download(kind: 'session-report' | 'csv' | 'points-csv' | 'json'): Promise<void> {
    const api = this._dash.dashboard?.api;
    if (!api || !this._open) return;
    const r = await api.download(kind, [this._open.id]);
    if (r.ok) saveBlob(r.value.blob, r.value.name);
    else this._note = `download failed: ${r.error}`;
  }

  private _pick(id: number, on: boolean): void {
    this._picked = on ? [...this._picked.filter((x) => x !== id), id] : this._picked.filter((x) => x !== id);
  }

  private _filter(key: keyof SessionQuery, value: string): void {
    this._q = { ...this._q, [key]: value };
    void this.refresh();
  }

  private _renderList() {
    const list = this._list;
    return html`
      <h2>Sessions</h2>
      <div class="filters" data-testid="session-filters">
        <label>Search title and notes<input type="search" data-testid="filter-text" .value=${this._q.text ?? ''} @change=${(e: Event) => this._filter('text', (e.target as HTMLInputElement).value)} /></label>
        <label>Tag<input type="text" data-testid="filter-tag" size="10" .value=${this._q.tag ?? ''} @change=${(e: Event) => this._filter('tag', (e.target as HTMLInputElement).value)} /></label>
        <label>Rig<input type="text" data-testid="filter-rig" size="12" .value=${this._q.rig ?? ''} @change=${(e: Event) => this._filter('rig', (e.target as HTMLInputElement).value)} /></label>
        <label
          >Outcome<select data-testid="filter-outcome" @change=${(e: Event) => this._filter('outcome', (e.target as HTMLSelectElement).value)}>
            ${OUTCOMES.map((o) => html`<option value=${o} ?selected=${(this._q.outcome ?? '') === o}>${o || 'any'}</option>`)}
          </select></label
        >
        <label>From<input type="date" data-testid="filter-from" .value=${this._q.from ?? ''} @change=${(e: Event) => this._filter('from', (e.target as HTMLInputElement).value)} /></label>
        <label>To<input type="date" data-testid="filter-to" .value=${this._q.to ?? ''} @change=${(e: Event) => this._filter('to', (e.target as HTMLInputElement).value)} /></label>
        <button data-testid="sessions-refresh" @click=${() => void this.refresh()}>Refresh</button>
        <button
          data-testid="compare-picked"
          ?disabled=${this._picked.length < 2}
          title="The first ticked session is the baseline"
          @click=${() => this.dispatchEvent(new CustomEvent('db-compare', { detail: [...this._picked], bubbles: true, composed: true }))}
        >
          Compare ticked (${this._picked.length})
        </button>
      </div>
      ${this._error ? html`<p class="error" data-testid="sessions-error">${this._error}</p>` : nothing}
      ${list === null
        ? html`<p class="muted">loading…</p>`
        : list.length === 0
          ? html`<p class="muted" data-testid="sessions-empty">No sessions match.</p>`
          : html`<div class="scroll">
              <table data-testid="sessions-list">
                <thead>
                  <tr>
                    <th title="tick to compare; the first ticked is the baseline">cmp</th>
                    <th class="num">#</th>
                    <th>title</th>
                    <th>tags</th>
                    <th>rig</th>
                    <th>outcome</th>
                    <th>started</th>
                    <th class="num">points</th>
                    <th class="num">samples</th>
                  </tr>
                </thead>
                <tbody>
                  ${list.map(
                    (s) => html`<tr data-session=${s.id}>
                      <td>
                        <input type="checkbox" data-testid=${`pick-${s.id}`} .checked=${this._picked.includes(s.id)} @change=${(e: Event) => this._pick(s.id, (e.target as HTMLInputElement).checked)} />
                      </td>
                      <td class="num">${s.id}</td>
                      <td><button class="link" data-testid=${`open-${s.id}`} @click=${() => void this._openSession(s.id)}>${s.title || `session ${s.id}`}</button></td>
                      <td>${s.tags.map((t) => html`<span class="tag">${t}</span>`)}</td>
                      <td>${s.rig_name ?? '—'}</td>
                      <td><span class="badge ${outcomeTone(s.outcome)}">${s.outcome}</span></td>
                      <td>${when(s.started_at)}</td>
                      <td class="num">${s.point_count}</td>
                      <td class="num">${s.sample_count}</td>
                    </tr>`,
                  )}
                </tbody>
              </table>
            </div>`}
    `;
  }

  private _renderDetail(s: SessionRecord) {
    const b = this._samples;
    const thrust = b ? seriesOf(b, 'thrust') : null;
    const power = b ? seriesOf(b, 'power') : null;
    const timeSpec: XySpec | null =
      thrust && power
        ? {
            title: `Session ${s.id}: thrust and power`,
            subtitle: s.title,
            xLabel: 'time from start (s)',
            yLabel: 'thrust (N) · power (W / 10)',
            series: [
              { label: 'thrust (N)', colour: '#2458a6', kind: 'line', ...thrust },
              { label: 'power (W / 10)', colour: '#a3245e', kind: 'line', x: power.x, y: power.y.map((v) => (v === null ? null : v / 10)) },
            ],
          }
        : null;
    const pts = s.points.filter((p) => p.channels.thrust && p.channels.power && p.grams_per_watt !== null);
    const gpwSpec: XySpec | null = pts.length
      ? {
          title: `Session ${s.id}: thrust per watt`,
          subtitle: s.title,
          xLabel: 'thrust (N)',
          yLabel: 'gf/W',
          series: [
            {
              label: 'operating points (± 1 std)',
              colour: '#c2185b',
              kind: 'points',
              x: pts.map((p) => p.channels.thrust!.mean),
              y: pts.map((p) => p.grams_per_watt as number),
              xErr: pts.map((p) => p.channels.thrust!.std),
              yErr: pts.map((p) => gpwStd(p.channels.thrust!.mean, p.channels.thrust!.std, p.channels.power!.mean, p.channels.power!.std)),
            },
          ],
        }
      : null;
    const e = this._edit ?? { title: '', notes: '', tags: '' };
    const recording = this._dash.client?.run?.live && this._dash.client?.run?.session === s.id;
    return html`
      <section data-testid="session-detail" data-session=${s.id}>
        <div class="row">
          <button data-testid="session-back" @click=${() => (this._open = null)}>← All sessions</button>
          <h2 style="margin:0">Session ${s.id}</h2>
          <span class="badge ${outcomeTone(s.outcome)}">${s.outcome}</span>
          <span class="muted">${when(s.started_at)} to ${when(s.ended_at)} · rig ${s.rig_name ?? '—'} · ${s.sample_count} samples · ${s.point_count} points${s.atmosphere?.density_kg_m3 ? ` · air ${Number(s.atmosphere.density_kg_m3).toFixed(3)} kg/m³` : ''}</span>
        </div>
        ${s.mount?.length
          ? html`<p class="muted" data-testid="session-parts">
              Parts: ${s.mount.map((m) => `${m.slot} ${m.name} (#${m.part_id} r${m.revision})`).join(' · ')}
            </p>`
          : ''}
        <div class="row">
          <label style="flex:1 1 16rem">Title<input type="text" data-testid="edit-title" .value=${e.title} @input=${(ev: Event) => (this._edit = { ...e, title: (ev.target as HTMLInputElement).value })} /></label>
          <label style="flex:1 1 12rem">Tags, comma-separated<input type="text" data-testid="edit-tags" .value=${e.tags} @input=${(ev: Event) => (this._edit = { ...e, tags: (ev.target as HTMLInputElement).value })} /></label>
        </div>
        <label>Notes<textarea data-testid="edit-notes" .value=${e.notes} @input=${(ev: Event) => (this._edit = { ...e, notes: (ev.target as HTMLTextAreaElement).value })}></textarea></label>
        <div class="row" style="margin-top:0.5rem">
          <button data-testid="edit-save" @click=${() => void this._save()}>Save</button>
          <button data-testid="dl-report" @click=${() => void this._download('session-report')}>Report (HTML)</button>
          <button data-testid="dl-csv" @click=${() => void this._download('csv')}>Samples (CSV)</button>
          <button data-testid="dl-points" @click=${() => void this._download('points-csv')}>Points (CSV)</button>
          <button data-testid="dl-json" @click=${() => void this._download('json')}>Session (JSON)</button>
          ${this._confirmDelete
            ? html`<span class="error">Delete session ${s.id} and all its samples for good?</span>
                <button data-testid="delete-confirm" @click=${() => void this._delete()}>Delete</button>
                <button data-testid="delete-cancel" @click=${() => (this._confirmDelete = false)}>Keep it</button>`
            : html`<button data-testid="delete" ?disabled=${recording} title=${recording ? 'being recorded' : ''} @click=${() => (this._confirmDelete = true)}>Delete…</button>`}
          <span class="note" data-testid="session-note">${this._note}</span>
        </div>
        <div class="charts">
          ${timeSpec ? html`<db-xy-chart .spec=${timeSpec} data-testid="session-time-chart"></db-xy-chart>` : nothing}
          ${gpwSpec ? html`<db-xy-chart .spec=${gpwSpec} data-testid="session-gpw-chart"></db-xy-chart>` : nothing}
        </div>
        ${s.points.length
          ? html`<h2>Operating points</h2>
              <div class="scroll">
                <table data-testid="session-points">
                  <thead>
                    <tr>
                      <th class="num">step</th>
                      <th class="num">throttle</th>
                      <th class="num">thrust (N)</th>
                      <th class="num">± std</th>
                      <th class="num">power (W)</th>
                      <th class="num">g/W</th>
                      <th class="num">FM</th>
                      <th class="num">predicted g/W</th>
                      <th class="num">deviation</th>
                      <th>settled</th>
                    </tr>
                  </thead>
                  <tbody>
                    ${s.points.map(
                      (p) => html`<tr>
                        <td class="num">${p.index + 1}</td>
                        <td class="num">${fmtPercent(p.throttle, 0)}</td>
                        <td class="num">${fmt(p.channels.thrust?.mean, 3)}</td>
                        <td class="num">${fmt(p.channels.thrust?.std, 3)}</td>
                        <td class="num">${fmt(p.channels.power?.mean, 1)}</td>
                        <td class="num">${fmt(p.grams_per_watt, 2)}</td>
                        <td class="num">${fmt(p.figure_of_merit, 3)}</td>
                        <td class="num">${fmt(p.predicted?.grams_per_watt, 2)}</td>
                        <td class="num">${p.deviation_pct === null ? '—' : `${fmt(p.deviation_pct, 1)} %`}</td>
                        <td>${p.settled ? 'yes' : 'no'}</td>
                      </tr>`,
                    )}
                  </tbody>
                </table>
              </div>`
          : html`<p class="muted">No operating points (a manual session: its samples are above).</p>`}
        <h2>Events</h2>
        ${s.events.length
          ? html`<div class="scroll">
              <table data-testid="session-events">
                <tbody>
                  ${s.events.slice(-200).map(
                    (ev) => html`<tr>
                      <td class="num" style="width:1%">${new Date(ev.t).toLocaleTimeString(undefined, { hour12: false })}</td>
                      <td style="width:1%"><span class="badge ${ev.level === 'error' ? 'bad' : ev.level === 'warn' ? 'warn' : ''}">${ev.level}</span></td>
                      <td>${ev.text}</td>
                    </tr>`,
                  )}
                </tbody>
              </table>
            </div>`
          : html`<p class="muted">No events.</p>`}
      </section>
    `;
  }

  override render() {
    return this._open ? this._renderDetail(this._open) : this._renderList();
  }
}
customElements.define('db-sessions-view', DbSessionsView);

/** Standard deviation of thrust / power in gram-force per watt, first-order propagation of both spreads. */
export function gpwStd(thrust: number, thrustStd: number, power: number, powerStd: number): number {
  if (!(thrust > 0) || !(power > 0)) return 0;
  const gpw = thrust / G0 / 1e-3 / power;
  return gpw * Math.hypot(thrustStd / thrust, powerStd / power);
}
