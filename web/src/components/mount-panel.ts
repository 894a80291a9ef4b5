import { LitElement, css, html } from 'lit';
import type { MountView, PartView } from '../../../server/api/messages.js';
import { MAX_PART_NAME, PART_KINDS, type PartKind } from '../../../server/parts/types.js';
import { DashboardController } from '../data/context.js';
import { fieldStyles, panelStyles } from './styles.js';

/** snapshot.extras.mount and .parts, or null/[] from a daemon without them. */
export function readMount(extras: Readonly<Record<string, unknown>> | undefined): { mount: MountView | null; parts: PartView[] } {
  const m = extras?.mount as MountView | undefined;
  const p = extras?.parts as PartView[] | undefined;
  return { mount: m && Array.isArray(m.slots) ? m : null, parts: Array.isArray(p) ? p : [] };
}

const SLOT_LABELS: Record<PartKind, string> = { propeller: 'Propeller', motor: 'Motor', esc: 'ESC', supply: 'Supply', duct: 'Duct' };

/** A starting document per kind for "new part": the fields a rig file's section needs. */
const TEMPLATES: Record<PartKind, Record<string, unknown>> = {
  propeller: { diameter_m: 0.254, pitch_m: 0.1143, blades: 2 },
  motor: { kv_rpm_per_v: 860, resistance_ohm: 0.1, no_load_current_a: 0.6, no_load_voltage_v: 10, mass_kg: 0.06 },
  esc: { efficiency: 0.95 },
  supply: { cells: 4, internal_resistance_ohm: 0.05 },
  duct: { bore_diameter_m: 0.2565, inlet_lip_radius_m: 0.012, exit_diameter_m: 0.2664, length_m: 0.09, mass_kg: 0.085, notes: '' },
};

/**
 * What is on the stand. Every dashboard sees the mount; the controlling one, while the bench is disarmed,
 * picks a part per slot from the library (the duct may be none) or adds a part on the spot, then mounts. The
 * daemon decides: it refuses while armed or during a run and says why, and every dashboard follows the result
 * through extras.mount (the prediction and the limits in force come with it).
 */
export class DbMountPanel extends LitElement {
  static override styles = [
    panelStyles,
    fieldStyles,
    css`
      .slots {
        display: grid;
        gap: 0.45rem;
        margin: 0.4rem 0 0.6rem;
      }
      .slot select {
        width: 100%;
      }
      .buttons {
        display: flex;
        flex-wrap: wrap;
        gap: 0.5rem;
        margin-top: 0.5rem;
      }
      details {
        margin-top: 0.7rem;
      }
      summary {
        cursor: pointer;
        font-size: 0.85rem;
        font-weight: 600;
      }
      textarea {
        width: 100%;
        min-height: 6.5rem;
        font-family: ui-monospace, monospace;
        font-size: 0.8rem;
      }
      .new {
        display: grid;
        gap: 0.4rem;
        margin-top: 0.4rem;
      }
    `,
  ];
  static override properties = { _picks: { state: true }, _name: { state: true }, _result: { state: true }, _newKind: { state: true }, _newName: { state: true }, _newText: { state: true }, _newResult: { state: true } };
  declare _picks: Partial<Record<PartKind, number | null>>;
  declare _name: string;
  declare _result: { ok: boolean; text: string } | null;
  declare _newKind: PartKind;
  declare _newName: string;
  declare _newText: string;
  declare _newResult: { ok: boolean; text: string } | null;

  private readonly _dash = new DashboardController(this, ['connection', 'snapshot', 'bench', 'extras', 'role', 'run']);

  constructor() {
    super();
    this._picks = {};
    this._name = '';
    this._result = null;
    this._newKind = 'duct';
    this._newName = '';
    this._newText = JSON.stringify(TEMPLATES.duct, null, 1);
    this._newResult = null;
  }

  /** The pick for a slot: the operator's choice, else what is mounted. */
  private _pick(slot: PartKind, mount: MountView): number | null {
    if (slot in this._picks) return this._picks[slot] ?? null;
    return mount.slots.find((s) => s.slot === slot)?.part_id ?? null;
  }

  private async _mount(mount: MountView): Promise<void> {
    const c = this._dash.client;
    if (!c) return;
    const parts = Object.fromEntries(PART_KINDS.map((k) => [k, this._pick(k, mount)])) as Record<PartKind, number | null>;
    const missing = PART_KINDS.filter((k) => k !== 'duct' && parts[k] === null);
    if (missing.length) {
      this._result = { ok: false, text: `pick a ${missing.join(', ')} first` };
      return;
    }
    this._result = { ok: true, text: 'mounting…' };
    const name = this._name.trim();
    const r = await c.send({ type: 'mount', parts: parts as never, ...(name ? { name } : {}) });
    if (r.ok) {
      this._picks = {};
      this._name = '';
      this._result = { ok: true, text: 'mounted: the prediction and the limits follow' };
    } else this._result = { ok: false, text: r.error };
  }

  private async _create(): Promise<void> {
    const c = this._dash.client;
    if (!c) return;
    let doc: unknown;
    try {
      doc = JSON.parse(this._newText);
    } catch (err) {
      this._newResult = { ok: false, text: `the fields are not JSON: ${(err as Error).message}` };
      return;
    }
    if (typeof doc !== 'object' || doc === null || Array.isArray(doc)) {
      this._newResult = { ok: false, text: 'the fields must be a JSON object' };
      return;
    }
    const r = await c.send({ type: 'part_create', kind: this._newKind, name: this._newName, document: doc as Record<string, unknown> });
    if (r.ok) {
      const p = r.data as { id: number; name: string; revision: number };
      // Ready to mount: the new part is picked in its slot.
      this._picks = { ...this._picks, [this._newKind]: p.id };
      this._newResult = { ok: true, text: `added ${p.name} (#${p.id}); it is picked below, press Mount` };
      this._newName = '';
    } else this._newResult = { ok: false, text: r.error };
  }

  override render() {
    const c = this._dash.client;
    const { mount, parts } = readMount(c?.extras);
    if (!mount) return html`<h2>Mounted</h2><p class="muted">this daemon does not say what is mounted</p>`;
    const controller = c?.connection.state === 'live' && c.role === 'controller';
    const st = c?.bench?.state;
    const armed = st === 'armed' || st === 'running';
    const runLive = c?.run?.live ?? false;
    const library = mount.why_not === null || !/library/.test(mount.why_not);
    // From the bench state and the run as this page has them now (the daemon refuses anyway, and says why).
    const closed = armed ? `the bench is ${st}: disarm to change what is mounted` : runLive ? 'a sequence is running: let it finish or abort it first' : null;
    return html`
      <h2>Mounted</h2>
      <p data-testid="mount-rig"><strong>${mount.rig ?? 'nothing described'}</strong> <span class="muted">(${mount.source})</span></p>
      <dl data-testid="mount-slots">
        ${mount.slots.map(
          (s) => html`<dt>${SLOT_LABELS[s.slot]}</dt>
            <dd data-testid=${`mount-slot-${s.slot}`}>
              ${s.name !== null ? html`${s.name} <span class="muted">r${s.revision}${s.latest !== null && s.revision !== null && s.latest > s.revision ? ` (r${s.latest} in the library)` : ''}</span><br />` : ''}
              <span class="muted">${s.summary}</span>
            </dd>`,
        )}
        ${mount.sigma !== null
          ? html`<dt>Exit-area ratio</dt><dd data-testid="mount-sigma">${mount.sigma.toFixed(3)}</dd>
              <dt>Tip gap</dt><dd>${mount.tip_clearance_mm!.toFixed(2)} mm (${mount.tip_clearance_pct_radius!.toFixed(2)} % of the radius)</dd>`
          : ''}
      </dl>
      ${!controller
        ? html`<p class="note" data-testid="mount-viewer-note">${c?.role === 'viewer' ? 'The controlling dashboard changes what is mounted.' : ''}</p>`
        : !library
          ? html`<p class="note">${mount.why_not}</p>`
          : html`
              <div class="slots">
                ${PART_KINDS.map((k) => {
                  const options = parts.filter((p) => p.kind === k);
                  const pick = this._pick(k, mount);
                  return html`<label class="slot"
                    >${SLOT_LABELS[k]}
                    <select
                      data-testid=${`mount-pick-${k}`}
                      @change=${(e: Event) => {
                        const v = (e.target as HTMLSelectElement).value;
                        this._picks = { ...this._picks, [k]: v === '' ? null : Number(v) };
                      }}
                    >
                      ${k === 'duct' ? html`<option value="" ?selected=${pick === null}>none (open propeller)</option>` : pick === null ? html`<option value="" selected>pick one</option>` : ''}
                      ${options.map((p) => html`<option value=${String(p.id)} ?selected=${p.id === pick}>${p.name} r${p.revision}: ${p.summary}</option>`)}
                    </select></label
                  >`;
                })}
              </div>
              <label
                >Name of this set-up (optional)
                <input data-testid="mount-name" maxlength=${MAX_PART_NAME} placeholder="the propeller's name and the duct's" .value=${this._name} @input=${(e: Event) => (this._name = (e.target as HTMLInputElement).value)}
              /></label>
              <div class="buttons">
                <button data-testid="mount-apply" ?disabled=${closed !== null} title=${closed ?? 'mount these parts'} @click=${() => void this._mount(mount)}>Mount</button>
              </div>
              ${closed ? html`<p class="note" data-testid="mount-closed">${closed}</p>` : ''}
              <p class="note" data-testid="mount-result">${this._result ? (this._result.ok ? this._result.text : html`<span class="error">${this._result.text}</span>`) : ''}</p>
              <details data-testid="part-new">
                <summary>New part</summary>
                <div class="new">
                  <label
                    >Kind
                    <select
                      data-testid="part-kind"
                      @change=${(e: Event) => {
                        this._newKind = (e.target as HTMLSelectElement).value as PartKind;
                        this._newText = JSON.stringify(TEMPLATES[this._newKind], null, 1);
                      }}
                    >
                      ${PART_KINDS.map((k) => html`<option value=${k} ?selected=${k === this._newKind}>${SLOT_LABELS[k]}</option>`)}
                    </select></label
                  >
                  <label>Name <input data-testid="part-name" maxlength=${MAX_PART_NAME} .value=${this._newName} @input=${(e: Event) => (this._newName = (e.target as HTMLInputElement).value)} /></label>
                  <label
                    >Fields (as in a rig file; metres, kilograms)
                    <textarea data-testid="part-fields" .value=${this._newText} @input=${(e: Event) => (this._newText = (e.target as HTMLTextAreaElement).value)}></textarea>
                  </label>
                  <div class="buttons"><button data-testid="part-create" ?disabled=${this._newName.trim() === ''} @click=${() => void this._create()}>Add to library</button></div>
                  <p class="note" data-testid="part-result">${this._newResult ? (this._newResult.ok ? this._newResult.text : html`<span class="error">${this._newResult.text}</span>`) : ''}</p>
                </div>
              </details>
            `}
    `;
  }
}
customElements.define('db-mount-panel', DbMountPanel);
