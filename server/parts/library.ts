// The parts library: the hardware a bench can mount, kept in the session store's database (tables in
// server/store/schema.ts, v4). A part has an id, a kind and a user's name; what it is lives in numbered
// revisions that are never changed once written (the database refuses it), so an edit adds the next
// revision and a session keeps the one it ran with. A part is retired rather than deleted: it can no longer
// be mounted, and the sessions that used it still find it.

import type Database from 'better-sqlite3';
import { RigError, parseRig } from '../model/rig.js';
import type { RigSpec } from '../model/rig-types.js';
import { StoreError } from '../store/errors.js';
import type { LimitLayer } from './limits.js';
import { MAX_PART_NAME, PART_KINDS, type MountedPart, type MountRequest, type PartDocument, type PartKind, type PartRevision, type PartSpecs } from './types.js';
import { parseName, parsePartDocument } from './validate.js';

export class PartNotFound extends StoreError {
  constructor(readonly id: number, readonly revision?: number) {
    super(revision === undefined ? `no part with id ${id}` : `part ${id} has no revision ${revision}`);
    this.name = 'PartNotFound';
  }
}

/** A request the library refuses (a name taken, a retired part, a part of the wrong kind). */
export class PartRefused extends StoreError {
  constructor(message: string) {
    super(message);
    this.name = 'PartRefused';
  }
}

/** The parts of a mount, resolved to revisions, and the rig they make together. */
export interface ResolvedMount {
  parts: { [K in Exclude<PartKind, 'duct'>]: PartRevision<K> } & { duct: PartRevision<'duct'> | null };
  /** The rig description the model and the interlocks read (validated as a whole: the duct against the propeller). */
  rig: RigSpec;
  /** The parts' own limit layers, in slot order. */
  limitLayers: LimitLayer[];
}

interface RevisionRow {
  id: number;
  kind: PartKind;
  name: string;
  retired_at: number | null;
  revision: number;
  latest: number;
  spec_json: string;
  notes: string;
  limits_json: string;
  created_at: number;
  used_by: number;
}

const REVISION_COLUMNS = `p.id, p.kind, p.name, p.retired_at, r.revision, r.spec_json, r.notes, r.limits_json, r.created_at,
  (SELECT max(revision) FROM part_revisions x WHERE x.part_id = p.id) AS latest,
  (SELECT count(*) FROM session_mounts m WHERE m.part_id = p.id AND m.revision = r.revision) AS used_by`;

function toRevision(row: RevisionRow): PartRevision {
  return {
    id: row.id,
    kind: row.kind,
    name: row.name,
    revision: row.revision,
    latest: row.latest,
    spec: JSON.parse(row.spec_json) as PartSpecs[PartKind],
    notes: row.notes,
    limits: JSON.parse(row.limits_json) as Record<string, number>,
    created_at: row.created_at,
    retired_at: row.retired_at,
    used_by: row.used_by,
  };
}

/** "motor FM-2609 (#3 r2)": how messages name a revision. */
export function partLabel(p: Pick<PartRevision, 'kind' | 'name' | 'id' | 'revision'>): string {
  return `${p.kind} ${p.name} (#${p.id} r${p.revision})`;
}

/** The document of a revision in the form a person writes it (spec fields, notes, limits). */
export function partDocumentJson(p: PartDocument): Record<string, unknown> {
  return { ...p.spec, ...(p.notes ? { notes: p.notes } : {}), ...(Object.keys(p.limits).length ? { limits: p.limits } : {}) };
}

export class PartsLibrary {
  private readonly st;

  constructor(private readonly db: Database.Database, private readonly now: () => number = Date.now) {
    this.st = {
      insertPart: db.prepare('INSERT INTO parts (kind, name, created_at) VALUES (?, ?, ?)'),
      insertRevision: db.prepare('INSERT INTO part_revisions (part_id, revision, spec_json, notes, limits_json, created_at) VALUES (?, ?, ?, ?, ?, ?)'),
      latest: db.prepare(`SELECT ${REVISION_COLUMNS} FROM parts p JOIN part_revisions r ON r.part_id = p.id WHERE p.id = ? ORDER BY r.revision DESC LIMIT 1`),
      revision: db.prepare(`SELECT ${REVISION_COLUMNS} FROM parts p JOIN part_revisions r ON r.part_id = p.id WHERE p.id = ? AND r.revision = ?`),
      revisions: db.prepare(`SELECT ${REVISION_COLUMNS} FROM parts p JOIN part_revisions r ON r.part_id = p.id WHERE p.id = ? ORDER BY r.revision`),
      list: db.prepare(
        `SELECT ${REVISION_COLUMNS} FROM parts p JOIN part_revisions r ON r.part_id = p.id
         WHERE r.revision = (SELECT max(revision) FROM part_revisions x WHERE x.part_id = p.id)
           AND (@kind IS NULL OR p.kind = @kind) AND (@retired = 1 OR p.retired_at IS NULL)
         ORDER BY p.kind, p.name COLLATE NOCASE, p.id`,
      ),
      activeByName: db.prepare('SELECT id FROM parts WHERE kind = ? AND name = ? AND retired_at IS NULL').pluck(),
      rename: db.prepare('UPDATE parts SET name = ? WHERE id = ?'),
      retire: db.prepare('UPDATE parts SET retired_at = ? WHERE id = ? AND retired_at IS NULL'),
      sessionsUsing: db.prepare('SELECT DISTINCT session_id FROM session_mounts WHERE part_id = ? AND (@revision IS NULL OR revision = @revision) ORDER BY session_id').pluck(),
    };
  }

  /** Adds a part (revision 1) from a part document; throws RigError naming the field, or PartRefused. */
  add(kind: PartKind, name: string, raw: unknown): PartRevision {
    const n = parseName(name);
    const doc = parsePartDocument(kind, raw);
    return this.db.transaction(() => {
      if (this.st.activeByName.get(kind, n) !== undefined) throw new PartRefused(`a ${kind} named ${JSON.stringify(n)} is already in the library: edit it, or pick another name`);
      const at = this.now();
      const id = Number(this.st.insertPart.run(kind, n, at).lastInsertRowid);
      this.st.insertRevision.run(id, 1, JSON.stringify(doc.spec), doc.notes, JSON.stringify(doc.limits), at);
      return this.get(id);
    })();
  }

  /**
   * Adds the next revision of a part: `patch` holds the fields to change (a field set to null is removed,
   * for optional fields such as a propeller's geometry); the result is validated whole. Renaming changes the
   * label only: no revision is needed for it.
   */
  edit(id: number, change: { patch?: Record<string, unknown>; name?: string }): PartRevision {
    return this.db.transaction(() => {
      const cur = this.get(id);
      if (cur.retired_at !== null) throw new PartRefused(`${partLabel(cur)} is retired: add a new part instead`);
      if (change.name !== undefined) {
        const n = parseName(change.name);
        if (n !== cur.name) {
          if (this.st.activeByName.get(cur.kind, n) !== undefined) throw new PartRefused(`a ${cur.kind} named ${JSON.stringify(n)} is already in the library`);
          this.st.rename.run(n, id);
        }
      }
      if (change.patch && Object.keys(change.patch).length > 0) {
        const merged: Record<string, unknown> = { ...partDocumentJson(cur) };
        for (const [k, v] of Object.entries(change.patch)) {
          if (v === null) delete merged[k];
          else merged[k] = v;
        }
        const doc = parsePartDocument(cur.kind, merged);
        const same = JSON.stringify(doc.spec) === JSON.stringify(cur.spec) && doc.notes === cur.notes && JSON.stringify(doc.limits) === JSON.stringify(cur.limits);
        if (!same) this.st.insertRevision.run(id, cur.revision + 1, JSON.stringify(doc.spec), doc.notes, JSON.stringify(doc.limits), this.now());
      }
      return this.get(id);
    })();
  }

  /** Retires a part: it stays for the sessions that used it and can no longer be mounted or edited. */
  retire(id: number): PartRevision {
    const cur = this.get(id);
    if (cur.retired_at !== null) throw new PartRefused(`${partLabel(cur)} is retired already`);
    this.st.retire.run(this.now(), id);
    return this.get(id);
  }

  /** A revision of a part (its latest by default). */
  get(id: number, revision?: number): PartRevision {
    const row = (revision === undefined ? this.st.latest.get(id) : this.st.revision.get(id, revision)) as RevisionRow | undefined;
    if (!row) {
      if (revision !== undefined && this.st.latest.get(id)) throw new PartNotFound(id, revision);
      throw new PartNotFound(id);
    }
    return toRevision(row);
  }

  /** Every revision of a part, oldest first. */
  history(id: number): PartRevision[] {
    const rows = this.st.revisions.all(id) as RevisionRow[];
    if (rows.length === 0) throw new PartNotFound(id);
    return rows.map(toRevision);
  }

  /** Latest revisions of the parts, by kind then name; retired parts only when asked. */
  list(filter: { kind?: PartKind; retired?: boolean } = {}): PartRevision[] {
    return (this.st.list.all({ kind: filter.kind ?? null, retired: filter.retired ? 1 : 0 }) as RevisionRow[]).map(toRevision);
  }

  /** Sessions that ran with a part (any revision, or the one given). */
  sessionsUsing(id: number, revision?: number): number[] {
    return this.st.sessionsUsing.all(id, { revision: revision ?? null }) as number[];
  }

  /**
   * The revisions a mount request names (latest of each), checked together as a rig. Throws PartNotFound,
   * PartRefused (wrong kind, retired) or RigError (the duct does not fit the propeller ...).
   */
  resolve(req: MountRequest, name?: string): ResolvedMount {
    const pick = <K extends PartKind>(slot: K, id: number): PartRevision<K> => {
      const p = this.get(id);
      if (p.kind !== slot) throw new PartRefused(`${slot}: part #${id} is a ${p.kind} (${p.name})`);
      if (p.retired_at !== null) throw new PartRefused(`${slot}: ${partLabel(p)} is retired`);
      return p as PartRevision<K>;
    };
    const parts = {
      propeller: pick('propeller', req.propeller),
      motor: pick('motor', req.motor),
      esc: pick('esc', req.esc),
      supply: pick('supply', req.supply),
      duct: req.duct === null ? null : pick('duct', req.duct),
    };
    return mountOf(parts, name);
  }

  /**
   * Puts a rig file's parts into the library: a part whose kind and fields equal an active part's is that
   * part; any other becomes a new part named after the rig ("quorrel-duct motor"), or the next revision of
   * the part already carrying that name. The rig's own `limits` are the bench's, not a part's: they stay
   * with the rig (serve --rig applies them).
   */
  importRig(rig: RigSpec): { mount: ResolvedMount; created: PartRevision[]; revised: PartRevision[]; reused: PartRevision[] } {
    return this.db.transaction(() => {
      const created: PartRevision[] = [];
      const revised: PartRevision[] = [];
      const reused: PartRevision[] = [];
      const place = (kind: PartKind, spec: unknown): number => {
        const json = JSON.stringify(parsePartDocument(kind, spec).spec);
        const same = this.list({ kind }).find((p) => JSON.stringify(p.spec) === json);
        if (same) {
          reused.push(same);
          return same.id;
        }
        const name = `${rig.name} ${kind}`.slice(0, MAX_PART_NAME);
        const taken = this.st.activeByName.get(kind, name) as number | undefined;
        if (taken !== undefined) {
          const cur = this.get(taken);
          const doc = parsePartDocument(kind, spec);
          this.st.insertRevision.run(taken, cur.revision + 1, JSON.stringify(doc.spec), cur.notes, JSON.stringify(cur.limits), this.now());
          revised.push(this.get(taken));
          return taken;
        }
        const p = this.add(kind, name, spec);
        created.push(p);
        return p.id;
      };
      const req: MountRequest = {
        propeller: place('propeller', rig.propeller),
        motor: place('motor', rig.motor),
        esc: place('esc', rig.esc),
        supply: place('supply', rig.supply),
        duct: rig.duct ? place('duct', rig.duct) : null,
      };
      return { mount: this.resolve(req, rig.name), created, revised, reused };
    })();
  }
}

/** The rig a set of revisions makes, validated whole; `name` defaults to the parts' names. */
export function mountOf(parts: ResolvedMount['parts'], name?: string): ResolvedMount {
  const rigName = (name ?? `${parts.propeller.name} ${parts.duct ? `in ${parts.duct.name}` : 'open'}`).slice(0, MAX_PART_NAME);
  const doc = {
    name: rigName,
    propeller: parts.propeller.spec,
    motor: parts.motor.spec,
    esc: parts.esc.spec,
    duct: parts.duct ? parts.duct.spec : null,
    supply: parts.supply.spec,
  };
  let rig: RigSpec;
  try {
    rig = parseRig(doc);
  } catch (err) {
    // A rule between two parts: say which parts, keep the field.
    if (err instanceof RigError) {
      const slot = err.path.split('.')[0] as PartKind;
      const p = (parts as Record<string, PartRevision | null>)[slot];
      throw new RigError(err.path, p ? `${err.rule} (${partLabel(p)})` : err.rule);
    }
    throw err;
  }
  const limitLayers = PART_KINDS.flatMap((k) => {
    const p = (parts as Record<string, PartRevision | null>)[k];
    return p && Object.keys(p.limits).length ? [{ from: partLabel(p), limits: p.limits }] : [];
  });
  return { parts, rig, limitLayers };
}

/** A mount's parts as stored with a session: slot, part, revision, name. */
export function mountedParts(parts: ResolvedMount['parts']): MountedPart[] {
  return PART_KINDS.flatMap((k) => {
    const p = (parts as Record<string, PartRevision | null>)[k];
    return p ? [{ slot: k, part_id: p.id, revision: p.revision, name: p.name }] : [];
  });
}

