// What is on the stand: the mount in force (a revision of a part in every slot, or a rig from a file when the
// daemon keeps no library), the limits it puts in force, and changing it while the bench is disarmed. The
// daemon listens for `mount` and re-points the prediction, the interlocks, the sequence runner and (on the
// virtual bench) the simulated hardware at the new rig, then tells every dashboard.

import type { MountSlotView, MountView, PartView } from '../api/messages.js';
import { LimitsError, parseLimits, type Limits } from '../interlocks/limits.js';
import { rigGeometry } from '../model/rig.js';
import type { RigSpec } from '../model/rig-types.js';
import { TypedEmitter } from '../util/emitter.js';
import { combineLimits } from './limits.js';
import { mountedParts, PartRefused, type PartsLibrary, type ResolvedMount } from './library.js';
import { PART_KINDS, type MountedPart, type MountRequest, type PartKind, type PartRevision, type PartSpecs } from './types.js';

/** Where the mount in force came from. */
export type MountSource = MountView['source'];

export interface MountState {
  /** The rig the model and the interlocks read; its `limits` are the combined limits in force. */
  rig: RigSpec | null;
  /** The library revisions, or null for a rig from a file with no library behind it. */
  parts: ResolvedMount['parts'] | null;
  limits: Limits;
  /** Who set each limit that differs from the default: a part's label or "bench". */
  limitSource: Record<string, string>;
  source: MountSource;
  at: number;
}

export interface MountServiceDeps {
  /** The library, or null when the daemon has no data folder (the first mount is then the only one). */
  library: PartsLibrary | null;
  /** The bench's own limits (the rig file's `limits` section, then the command line's), raw. */
  benchLimits: Record<string, number>;
  /** Why mounting is refused right now (armed, a run in progress ...), or null when it may proceed. */
  refusal: () => string | null;
  now?: () => number;
}

export class MountError extends Error {
  override readonly name = 'MountError';
}

const mm = (m: number) => `${+(m * 1000).toFixed(1)} mm`;

/** One line saying what a part is, for pickers and lists. */
export function partSummary<K extends PartKind>(kind: K, spec: PartSpecs[K]): string {
  switch (kind) {
    case 'propeller': {
      const p = spec as PartSpecs['propeller'];
      const extra = p.static_table ? ', static table' : p.geometry ? ', blade geometry' : '';
      return `${mm(p.diameter_m)} x ${mm(p.pitch_m)} pitch, ${p.blades} blades${extra}`;
    }
    case 'motor': {
      const m = spec as PartSpecs['motor'];
      return `${m.kv_rpm_per_v} rpm/V, ${m.resistance_ohm} ohm, ${m.no_load_current_a} A at ${m.no_load_voltage_v} V, ${+(m.mass_kg * 1000).toFixed(1)} g`;
    }
    case 'esc': {
      const e = spec as PartSpecs['esc'];
      return e.efficiency !== undefined ? `efficiency ${e.efficiency}` : e.resistance_ohm !== undefined ? `${e.resistance_ohm} ohm` : 'default efficiency';
    }
    case 'supply': {
      const s = spec as PartSpecs['supply'];
      const v = s.cells !== undefined ? `${s.cells} cells` : `${s.voltage_v} V supply`;
      return `${v}, ${s.internal_resistance_ohm} ohm${s.capacity_mah ? `, ${s.capacity_mah} mAh` : ''}`;
    }
    default: {
      const d = spec as PartSpecs['duct'];
      return `bore ${mm(d.bore_diameter_m)}, exit ${mm(d.exit_diameter_m)}, lip ${mm(d.inlet_lip_radius_m)}, ${mm(d.length_m)} long, ${+(d.mass_kg * 1000).toFixed(1)} g`;
    }
  }
}

export function partView(p: PartRevision): PartView {
  return { id: p.id, kind: p.kind, name: p.name, revision: p.revision, summary: partSummary(p.kind, p.spec), notes: p.notes };
}

interface MountEvents {
  mount: MountState;
  parts: PartView[];
}

export class MountService extends TypedEmitter<MountEvents> {
  private current: MountState;
  private readonly now: () => number;

  constructor(private readonly d: MountServiceDeps) {
    super();
    this.now = d.now ?? Date.now;
    this.current = this.stateFor(null, null, 'none');
  }

  get state(): MountState {
    return this.current;
  }

  get library(): PartsLibrary | null {
    return this.d.library;
  }

  /**
   * The first mount, at start: a rig from a file or the virtual bench's. With a library its parts are
   * imported (equal parts are found again, not duplicated), so the sessions link to them from the first run.
   */
  setInitial(rig: RigSpec | null, source: MountSource): MountState {
    if (!rig) return (this.current = this.stateFor(null, null, 'none'));
    if (this.d.library) {
      const { mount } = this.d.library.importRig(rig);
      // The file's name and description stay the rig's.
      const named: RigSpec = { ...mount.rig, name: rig.name, ...(rig.description !== undefined ? { description: rig.description } : {}) };
      this.current = this.stateFor(named, mount, source);
    } else {
      this.current = this.stateFor(rig, null, source);
    }
    return this.current;
  }

  /** Mounts library parts (their latest revisions). Refused with the reason while the bench may turn. */
  mount(req: MountRequest, name?: string): MountState {
    const lib = this.requireLibrary('mounting from the library');
    const why = this.d.refusal();
    if (why) throw new MountError(`mounting refused: ${why}`);
    const resolved = lib.resolve(req, name);
    const next = this.stateFor(resolved.rig, resolved, 'library');
    this.current = next;
    this.emit('mount', next);
    return next;
  }

  /** Adds a part to the library (from a dashboard: "create a part on the spot"). */
  createPart(kind: PartKind, name: string, document: unknown): PartRevision {
    const lib = this.requireLibrary('adding a part');
    const p = lib.add(kind, name, document);
    this.emit('parts', this.partsView());
    return p;
  }

  /** The parts a session recorded now would link to. */
  sessionParts(): MountedPart[] {
    return this.current.parts ? mountedParts(this.current.parts) : [];
  }

  partsView(): PartView[] {
    return this.d.library ? this.d.library.list().map(partView) : [];
  }

  view(): MountView {
    const st = this.current;
    const geo = st.rig ? rigGeometry(st.rig) : null;
    const slots: MountSlotView[] = PART_KINDS.map((slot) => {
      const p = st.parts ? (st.parts as Record<string, PartRevision | null>)[slot] : null;
      const spec = st.rig ? (st.rig as unknown as Record<string, unknown>)[slot] : null;
      return {
        slot,
        part_id: p?.id ?? null,
        revision: p?.revision ?? null,
        // Read again: the part may have been revised since (`ductbench parts edit` beside the daemon).
        latest: p ? this.latestRevision(p) : null,
        name: p?.name ?? null,
        summary: spec ? partSummary(slot, spec as PartSpecs[typeof slot]) : slot === 'duct' ? 'none (open propeller)' : '-',
      };
    });
    const why = this.d.library ? this.d.refusal() : 'this daemon keeps no parts library (started without a data folder)';
    return {
      rig: st.rig?.name ?? null,
      ducted: !!st.rig?.duct,
      source: st.source,
      slots,
      sigma: geo?.sigma ?? null,
      tip_clearance_mm: geo?.tipClearance_mm ?? null,
      tip_clearance_pct_radius: geo?.tipClearance_pctRadius ?? null,
      mounted_at: st.at,
      can_mount: why === null,
      why_not: why,
    };
  }

  private latestRevision(p: PartRevision): number {
    try {
      return this.d.library?.get(p.id).revision ?? p.latest;
    } catch {
      return p.latest;
    }
  }

  private requireLibrary(what: string): PartsLibrary {
    if (!this.d.library) throw new PartRefused(`${what} needs the parts library, and this daemon keeps none (started without a data folder: pass --data-dir)`);
    return this.d.library;
  }

  private stateFor(rig: RigSpec | null, mount: ResolvedMount | null, source: MountSource): MountState {
    // The bench's limits (the first rig file's section, the command line's on top) hold for every mount.
    const bench = this.d.benchLimits;
    let combined: { limits: Record<string, number>; source: Record<string, string> };
    let limits: Limits;
    try {
      combined = combineLimits(mount?.limitLayers ?? [], bench);
      limits = parseLimits(combined.limits, 'limits in force');
    } catch (err) {
      if (err instanceof LimitsError || (err as Error).name === 'LimitConflict') throw new MountError(`mounting refused: ${(err as Error).message}`);
      throw err;
    }
    const withLimits: RigSpec | null = rig ? { ...rig, ...(Object.keys(combined.limits).length ? { limits: combined.limits } : {}) } : null;
    return { rig: withLimits, parts: mount?.parts ?? null, limits, limitSource: combined.source, source, at: this.now() };
  }
}
