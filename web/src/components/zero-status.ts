import { LitElement, css, html, nothing } from 'lit';
import type { ZeroView } from '../../../server/api/messages.js';
import { DashboardController } from '../data/context.js';
import { fmt, fmtClock, type Tone } from './format.js';
import { panelStyles } from './styles.js';

/** The zero step before every run (extras.zero), or null from a daemon without it. */
export function readZero(extras: Readonly<Record<string, unknown>> | undefined): ZeroView | null {
  const z = extras?.zero as ZeroView | undefined;
  return z && typeof z.state === 'string' ? z : null;
}

const LABELS: Record<ZeroView['state'], [string, Tone]> = {
  none: ['not zeroed yet', ''],
  checking: ['reading at rest…', 'warn'],
  tared: ['zeroed', 'good'],
  kept: ['earlier zero kept', 'warn'],
  refused: ['refused', 'bad'],
};

/**
 * The zero of the coming or current run: what the last zero step did (the offset it took, the at-rest reading,
 * why it refused), and the zero's drift over the last run once read again.
 */
export class DbZeroStatus extends LitElement {
  static override styles = [
    panelStyles,
    css`
      dl {
        display: grid;
        grid-template-columns: auto 1fr;
        gap: 0.15rem 0.7rem;
        margin: 0.4rem 0 0;
      }
      dt {
        color: var(--db-muted);
      }
      dd {
        margin: 0;
      }
    `,
  ];

  private readonly _dash = new DashboardController(this, ['snapshot', 'extras', 'connection']);

  override render() {
    const z = readZero(this._dash.client?.extras);
    if (!z) return nothing;
    const [label, tone] = LABELS[z.state];
    const a = z.after;
    return html`
      <h2>Zero</h2>
      <p data-testid="zero" data-state=${z.state} data-offset=${String(z.offset_N)}>
        <span class="badge ${tone}">${label}</span>
        <span class=${z.state === 'refused' ? 'error' : 'note'} data-testid="zero-reason">${z.reason}</span>
      </p>
      <dl>
        <dt>offset</dt>
        <dd data-testid="zero-offset">${fmt(z.offset_N, 3)} N${z.at !== null ? html` <span class="muted">at ${fmtClock(z.at)}</span>` : nothing}</dd>
        ${z.reading
          ? html`<dt>at rest</dt>
              <dd>${fmt(z.reading.mean_N, 3)} N ± ${fmt(z.reading.std_N, 3)} over ${z.reading.window_s} s${z.reading.rpm_max !== null ? `, ${Math.round(z.reading.rpm_max)} rpm` : ''}</dd>`
          : nothing}
        ${a
          ? html`<dt>after run</dt>
              <dd data-testid="zero-drift" data-state=${a.state} data-warned=${String(a.warned)} class=${a.warned ? 'error' : ''}>
                ${a.state === 'read' ? html`drift ${fmt(a.drift_N, 3)} N${a.fraction !== null ? ` (${fmt(a.fraction * 100, 2)} % of the range)` : ''}` : a.reason}
              </dd>`
          : nothing}
      </dl>
      <p class="note">Every run first reads the thrust at rest and takes it as zero; it refuses while the reading is not steady.</p>
    `;
  }
}
customElements.define('db-zero-status', DbZeroStatus);
