// The session store: one SQLite file in the data folder holding every recorded or imported session. WAL
// journal with synchronous=NORMAL: a committed transaction survives the process being killed (it is in the
// WAL, which the next open replays); only an operating-system crash or power cut can take the last commits.
//
// One writer at a time is SQLite's rule; the daemon records, and the CLI may read or edit alongside it
// (busy_timeout makes the CLI wait its turn instead of failing).

import Database from 'better-sqlite3';
import { existsSync, mkdirSync, readFileSync, rmSync, statSync } from 'node:fs';
import { join, resolve } from 'node:path';
import type { SampleBatch } from '../api/messages.js';
import type { OperatingPoint } from '../bench/operating-point.js';
import type { Sample } from '../bench/telemetry.js';
import { BLOCK_COLUMNS, blockRange, MAX_BLOCK_ROWS, orderedRows, packSamples, type BlockEntry } from './blocks.js';
import { keepAll, minmaxDecimator, rowsToBatch, strideDecimator, type SampleRow } from './decimate.js';
import { InvalidInput, SessionNotFound } from './errors.js';
import { SessionRecorder, type RecorderOptions, type RecorderSink } from './recorder.js';
import { migrate, SAMPLE_COLUMNS, SCHEMA_VERSION } from './schema.js';
import type { MountedPart } from '../parts/types.js';
import {
  SESSION_OUTCOMES,
  type FinalOutcome,
  type ListFilter,
  type SampleQuery,
  type SessionContext,
  type SessionOutcome,
  type SessionPatch,
  type SessionRecord,
  type SessionSummary,
  type StoredEvent,
} from './types.js';

/** Documented default data folder, relative to the working directory. */
export const DEFAULT_DATA_DIR = './ductbench-data';
export const DB_FILE = 'sessions.sqlite';

class OlderSchema extends Error {}

const INTERRUPTED_TEXT = 'session interrupted: the recording process stopped without finishing the session; data up to its last commit is kept';

/** A running session whose recorder has not written for this long is taken as dead even if its pid is alive (pid reuse). */
const STALE_HEARTBEAT_MS = 60_000;

export interface StoreOptions {
  /**
   * Open the existing file for reading only: no migration, no recovery, nothing written, so it works on a full
   * disk (for `sessions list|show|export|report` and `compare`). Writing through it fails as SQLITE_READONLY.
   */
  readOnly?: boolean;
  /** Mark sessions left 'running' by a dead recorder as 'interrupted' on open (default true). */
  recover?: boolean;
  /** Upper bound on the database size; writes past it fail as a full disk would (SQLITE_FULL). */
  maxDatabaseBytes?: number;
  /**
   * How long a write waits for another process's lock, ms (default 5000, right for the CLI). The daemon should
   * pass a few tens of ms: the wait blocks its event loop, and a recorder whose commit fails with SQLITE_BUSY
   * simply keeps the batch and retries on its next tick.
   */
  busyTimeoutMs?: number;
  now?: () => number;
}

interface SessionRow {
  id: number;
  title: string;
  notes: string;
  outcome: SessionOutcome;
  started_at: number;
  ended_at: number | null;
  rig_name: string | null;
  sample_count: number;
  point_count: number;
  tags_json: string;
}

interface FullRow extends SessionRow {
  rig_json: string | null;
  calibration_json: string | null;
  atmosphere_json: string | null;
  firmware_json: string | null;
  sequence_json: string | null;
}

const SUMMARY_COLUMNS = `s.id, s.title, s.notes, s.outcome, s.started_at, s.ended_at, s.rig_name, s.sample_count,
  (SELECT count(*) FROM points p WHERE p.session_id = s.id) AS point_count,
  (SELECT json_group_array(tag) FROM (SELECT tag FROM session_tags g WHERE g.session_id = s.id ORDER BY tag)) AS tags_json`;

const MAX_TAG_LENGTH = 64;

/** Tags are short labels typed by people: trimmed, 1..64 characters, no control characters or commas. */
export function normalizeTag(tag: string): string {
  const t = tag.trim();
  if (t.length === 0) throw new InvalidInput('a tag must not be empty');
  if (t.length > MAX_TAG_LENGTH) throw new InvalidInput(`tag ${JSON.stringify(t.slice(0, 20))}...: longer than ${MAX_TAG_LENGTH} characters`);
  // eslint-disable-next-line no-control-regex
  if (/[\u0000-\u001f\u007f,]/.test(t)) throw new InvalidInput(`tag ${JSON.stringify(t)}: commas and control characters are not allowed`);
  return t;
}

function json(v: unknown): string | null {
  return v === undefined || v === null ? null : JSON.stringify(v);
}

function parse<T>(s: string | null): T | null {
  return s === null ? null : (JSON.parse(s) as T);
}

function pointPower(p: OperatingPoint): number | null {
  return p.channels.power?.mean ?? null;
}

function isAlive(pid: number): boolean {
  try {
    process.kill(pid, 0);
    return true;
  } catch (err) {
    // EPERM: it exists but belongs to someone else, so it is alive.
    return (err as NodeJS.ErrnoException).code === 'EPERM';
  }
}

export class SessionStore {
  readonly dataDir: string;
  readonly file: string;
  private readonly recorders = new Set<SessionRecorder>();
  private readonly now: () => number;
  private readonly st: ReturnType<SessionStore['prepare']>;
  /** Where writeBatch packs a block before binding it (SQLite copies the blob, so one buffer serves every block). */
  private readonly scratch = new Float64Array(MAX_BLOCK_ROWS * BLOCK_COLUMNS);
  private closed = false;

  private constructor(readonly db: Database.Database, dataDir: string, file: string, opts: StoreOptions) {
    this.dataDir = dataDir;
    this.file = file;
    this.now = opts.now ?? Date.now;
    this.st = this.prepare();
  }

  /** Opens (creating if needed) the store in `dataDir`, brings its schema up to date and recovers dead sessions. */
  static open(dataDir: string = DEFAULT_DATA_DIR, opts: StoreOptions = {}): SessionStore {
    if (opts.readOnly) return SessionStore.openReadOnly(dataDir, opts);
    const dir = resolve(dataDir);
    mkdirSync(dir, { recursive: true });
    const file = join(dir, DB_FILE);
    const db = new Database(file, { timeout: opts.busyTimeoutMs ?? 5000 });
    try {
      db.pragma('journal_mode = WAL');
      db.pragma('synchronous = NORMAL');
      db.pragma('foreign_keys = ON');
      migrate(db);
      if (opts.maxDatabaseBytes !== undefined) {
        const page = db.pragma('page_size', { simple: true }) as number;
        db.pragma(`max_page_count = ${Math.max(1, Math.floor(opts.maxDatabaseBytes / page))}`);
      }
    } catch (err) {
      db.close();
      throw err;
    }
    const store = new SessionStore(db, dir, file, opts);
    if (opts.recover ?? true) store.recoverInterrupted();
    return store;
  }

  /**
   * For commands that only read: the existing file read-only (works on a full disk, writes nothing, recovers
   * nothing); a folder with no store yet, or a store from an older version, is opened as usual instead.
   */
  static openForReading(dataDir: string = DEFAULT_DATA_DIR, opts: StoreOptions = {}): SessionStore {
    if (existsSync(join(resolve(dataDir), DB_FILE))) {
      try {
        return SessionStore.openReadOnly(dataDir, opts);
      } catch (err) {
        if (!(err instanceof OlderSchema)) throw err;
      }
    }
    return SessionStore.open(dataDir, opts);
  }

  private static openReadOnly(dataDir: string, opts: StoreOptions): SessionStore {
    const dir = resolve(dataDir);
    const file = join(dir, DB_FILE);
    if (!existsSync(file)) throw new Error(`no session store in ${dir} (nothing has been recorded there)`);
    const shm = `${file}-shm`;
    const wal = `${file}-wal`;
    const had = { shm: existsSync(shm), wal: existsSync(wal) };
    let db = new Database(file, { readonly: true, fileMustExist: true, timeout: opts.busyTimeoutMs ?? 5000 });
    try {
      db.pragma('user_version', { simple: true });
    } catch (err) {
      // The WAL index (-shm) cannot be created or grown: the disk is full. Remove what this attempt left
      // (a truncated index would stop the next opener too), and read a copy of the file in memory instead,
      // which needs nothing on disk. Only a file whose log is merged can be read that way.
      db.close();
      for (const [f, existed] of [[shm, had.shm], [wal, had.wal]] as const) if (!existed) rmSync(f, { force: true });
      if (existsSync(wal) && statSync(wal).size > 0) {
        throw new Error(`the session store in ${dir} cannot be read on this full disk (${(err as Error).message}) while its log holds unmerged changes; free some space`);
      }
      const copy = readFileSync(file);
      // Bytes 18 and 19 of the header say "WAL"; an in-memory copy is read with the rollback journal format.
      copy[18] = 1;
      copy[19] = 1;
      db = new Database(copy, { readonly: true });
    }
    try {
      const version = db.pragma('user_version', { simple: true }) as number;
      if (version < SCHEMA_VERSION) throw new OlderSchema(`the session store in ${dir} is from an older version (schema ${version}); open it once with a command that writes (serve, run, sessions tag) to bring it up to date`);
      if (version > SCHEMA_VERSION) throw new Error(`the session store in ${dir} is from a newer ductbench (schema ${version}, this one knows ${SCHEMA_VERSION})`);
      db.pragma('foreign_keys = ON');
    } catch (err) {
      db.close();
      throw err;
    }
    const store = new SessionStore(db, dir, file, { ...opts, recover: false });
    store.presumedDead = new Set(store.deadRunning());
    return store;
  }

  private prepare() {
    const db = this.db;
    return {
      insertSession: db.prepare(
        `INSERT INTO sessions (title, notes, outcome, started_at, rig_name, rig_json, calibration_json, atmosphere_json, firmware_json, sequence_json, recorder_pid, heartbeat_at)
         VALUES (@title, @notes, @outcome, @started_at, @rig_name, @rig_json, @calibration_json, @atmosphere_json, @firmware_json, @sequence_json, @recorder_pid, @heartbeat_at)`,
      ),
      insertMount: db.prepare('INSERT INTO session_mounts (session_id, slot, part_id, revision) VALUES (?, ?, ?, ?)'),
      mount: db.prepare(
        `SELECT m.slot, m.part_id, m.revision, p.name FROM session_mounts m JOIN parts p ON p.id = m.part_id WHERE m.session_id = ?
         ORDER BY CASE m.slot WHEN 'propeller' THEN 0 WHEN 'motor' THEN 1 WHEN 'esc' THEN 2 WHEN 'supply' THEN 3 ELSE 4 END`,
      ),
      insertTag: db.prepare('INSERT OR IGNORE INTO session_tags (session_id, tag) VALUES (?, ?)'),
      deleteTag: db.prepare('DELETE FROM session_tags WHERE session_id = ? AND tag = ?'),
      insertBlock: db.prepare('INSERT INTO sample_blocks (session_id, t0, t1, n, data) VALUES (?, ?, ?, ?, ?)'),
      insertPoint: db.prepare('INSERT INTO points (session_id, idx, throttle, thrust, power, t_start, json) VALUES (?, ?, ?, ?, ?, ?, ?)'),
      insertEvent: db.prepare('INSERT INTO events (session_id, t, level, kind, text, data_json) VALUES (?, ?, ?, ?, ?, ?)'),
      bumpCount: db.prepare('UPDATE sessions SET sample_count = sample_count + ?, heartbeat_at = ? WHERE id = ?'),
      finish: db.prepare("UPDATE sessions SET outcome = ?, ended_at = ?, recorder_pid = NULL WHERE id = ? AND outcome IN ('running', 'interrupted')"),
      exists: db.prepare('SELECT 1 FROM sessions WHERE id = ?').pluck(),
      summary: db.prepare(`SELECT ${SUMMARY_COLUMNS} FROM sessions s WHERE s.id = ?`),
      full: db.prepare(
        `SELECT ${SUMMARY_COLUMNS}, s.rig_json, s.calibration_json, s.atmosphere_json, s.firmware_json, s.sequence_json FROM sessions s WHERE s.id = ?`,
      ),
      points: db.prepare('SELECT json FROM points WHERE session_id = ? ORDER BY idx, rowid').pluck(),
      events: db.prepare('SELECT t, level, kind, text, data_json FROM events WHERE session_id = ? ORDER BY t, rowid'),
      running: db.prepare("SELECT id, recorder_pid, heartbeat_at, started_at FROM sessions WHERE outcome = 'running'"),
      lastTime: db.prepare(
        `SELECT max(m) FROM (SELECT max(t1) AS m FROM sample_blocks WHERE session_id = @id UNION ALL SELECT max(t) FROM events WHERE session_id = @id
         UNION ALL SELECT max(t_start) FROM points WHERE session_id = @id)`,
      ).pluck(),
      // A window's count and bounds: blocks wholly inside it from the index alone, the (at most a few) blocks
      // across its edges decoded.
      rangeInside: db.prepare('SELECT coalesce(sum(n), 0) AS n, min(t0) AS t0, max(t1) AS t1 FROM sample_blocks WHERE session_id = ? AND t0 >= ? AND t1 < ?'),
      rangeEdges: db.prepare('SELECT rowid AS id, n FROM sample_blocks WHERE session_id = @id AND t0 < @to AND t1 >= @from AND (t0 < @from OR t1 >= @to)'),
      // The blocks of a window from the index alone, in the order orderedRows needs (SQLite sorts only runs of
      // equal t0 by rowid); each blob is read when the merge reaches its block.
      blocks: db.prepare('SELECT rowid AS id, t0, n FROM sample_blocks WHERE session_id = ? AND t0 < ? AND t1 >= ? ORDER BY t0, rowid'),
      blockData: db.prepare('SELECT data FROM sample_blocks WHERE rowid = ?').pluck(),
      deleteSession: db.prepare('DELETE FROM sessions WHERE id = ?'),
    };
  }

  /**
   * Sessions left 'running' by a recorder that is gone (its process is dead, or it has not written for a minute)
   * become 'interrupted', ended at their last stored data, with an event saying so. Returns their ids.
   */
  recoverInterrupted(): number[] {
    const now = this.now();
    const dead = this.deadRunning();
    for (const id of dead) {
      this.db.transaction(() => {
        const last = this.lastTimeOf(id);
        this.db.prepare("UPDATE sessions SET outcome = 'interrupted', ended_at = ?, recorder_pid = NULL WHERE id = ?").run(last, id);
        this.st.insertEvent.run(id, last, 'warn', 'session', INTERRUPTED_TEXT, JSON.stringify({ recovered_at: now }));
      })();
    }
    return dead;
  }

  /** Sessions left 'running' by a recorder that is gone (its process dead, or silent past the stale limit). */
  private deadRunning(): number[] {
    const now = this.now();
    const own = new Set([...this.recorders].map((r) => r.id));
    const dead: number[] = [];
    for (const r of this.st.running.all() as { id: number; recorder_pid: number | null; heartbeat_at: number | null; started_at: number }[]) {
      if (own.has(r.id)) continue;
      const alive = r.recorder_pid !== null && isAlive(r.recorder_pid);
      const fresh = now - (r.heartbeat_at ?? r.started_at) < STALE_HEARTBEAT_MS;
      if (alive && fresh) continue;
      dead.push(r.id);
    }
    return dead;
  }

  private lastTimeOf(id: number): number {
    return (this.st.lastTime.get({ id }) as number | null) ?? (this.st.summary.get(id) as SessionRow).started_at;
  }

  /**
   * Read-only, nothing can be recovered in the file: a session whose recorder is gone is shown as the
   * recovery would leave it (interrupted, ended at its last sample, with the same event), without writing.
   */
  private presumedDead: Set<number> | null = null;

  private present<T extends SessionSummary>(x: T): T {
    if (!this.presumedDead?.has(x.id) || x.outcome !== 'running') return x;
    return { ...x, outcome: 'interrupted', ended_at: this.lastTimeOf(x.id) };
  }

  /** Creates a session and returns its id. `outcome` is 'running' for a live recording (see record()). */
  createSession(ctx: SessionContext = {}, outcome: SessionOutcome = 'running'): number {
    this.assertOpen();
    if (!SESSION_OUTCOMES.includes(outcome)) throw new InvalidInput(`unknown outcome ${JSON.stringify(outcome)}`);
    const tags = (ctx.tags ?? []).map(normalizeTag);
    const started = ctx.started_at ?? this.now();
    if (!Number.isFinite(started)) throw new InvalidInput('started_at must be a finite time in ms');
    return this.db.transaction(() => {
      const info = this.st.insertSession.run({
        title: ctx.title ?? '',
        notes: ctx.notes ?? '',
        outcome,
        started_at: started,
        rig_name: ctx.rig?.name ?? null,
        rig_json: json(ctx.rig),
        calibration_json: json(ctx.calibration),
        atmosphere_json: json(ctx.atmosphere),
        firmware_json: json(ctx.firmware),
        sequence_json: json(ctx.sequence),
        recorder_pid: outcome === 'running' ? process.pid : null,
        heartbeat_at: outcome === 'running' ? this.now() : null,
      });
      const id = Number(info.lastInsertRowid);
      for (const t of tags) this.st.insertTag.run(id, t);
      for (const m of ctx.mount ?? []) this.st.insertMount.run(id, m.slot, m.part_id, m.revision);
      return id;
    })();
  }

  /** Starts a live session and returns its recorder. */
  record(ctx: SessionContext = {}, opts: RecorderOptions = {}): SessionRecorder {
    const id = this.createSession(ctx, 'running');
    return this.recorderFor(id, opts);
  }

  /** A recorder for an existing running session (createSession then recorderFor is the same as record). */
  recorderFor(id: number, opts: RecorderOptions = {}): SessionRecorder {
    this.assertOpen();
    if (!this.st.exists.get(id)) throw new SessionNotFound(id);
    const sink: RecorderSink = {
      write: (samples, points, events) => this.writeBatch(id, samples, points, events),
      heartbeat: (now) => void this.st.bumpCount.run(0, now, id),
      finish: (outcome, at) => {
        this.st.finish.run(outcome, at, id);
      },
    };
    const rec = new SessionRecorder(id, sink, { now: this.now, ...opts }, (r) => this.recorders.delete(r));
    this.recorders.add(rec);
    return rec;
  }

  /** Appends rows to a session in one transaction (the recorder's path; also used by import). */
  writeBatch(id: number, samples: readonly Sample[], points: readonly OperatingPoint[] = [], events: readonly StoredEvent[] = []): void {
    this.assertOpen();
    const st = this.st;
    const scratch = this.scratch;
    this.db.transaction(() => {
      for (let i = 0; i < samples.length; i += MAX_BLOCK_ROWS) {
        const b = packSamples(samples, i, Math.min(samples.length, i + MAX_BLOCK_ROWS), { scratch });
        st.insertBlock.run(id, b.t0, b.t1, b.n, b.data);
      }
      // The count and the heartbeat ride in the same transaction as the rows they describe.
      st.bumpCount.run(samples.length, this.now(), id);
      for (const p of points) st.insertPoint.run(id, p.index, p.throttle, p.channels.thrust?.mean ?? null, pointPower(p), p.t_start, JSON.stringify(p));
      for (const e of events) st.insertEvent.run(id, e.t, e.level, e.kind, e.text, e.data === undefined ? null : JSON.stringify(e.data));
    })();
  }

  /** Sets the outcome and end time of a session directly (import, tests). */
  setOutcome(id: number, outcome: SessionOutcome, endedAt: number | null): void {
    this.assertOpen();
    const info = this.db.prepare('UPDATE sessions SET outcome = ?, ended_at = ?, recorder_pid = NULL WHERE id = ?').run(outcome, endedAt, id);
    if (info.changes === 0) throw new SessionNotFound(id);
  }

  list(filter: ListFilter = {}): SessionSummary[] {
    this.assertOpen();
    const where: string[] = [];
    const args: unknown[] = [];
    const tags = filter.tag === undefined ? [] : Array.isArray(filter.tag) ? filter.tag : [filter.tag];
    for (const t of tags) {
      where.push('EXISTS (SELECT 1 FROM session_tags g WHERE g.session_id = s.id AND g.tag = ?)');
      args.push(normalizeTag(t));
    }
    if (filter.text !== undefined && filter.text !== '') {
      const like = `%${filter.text.replace(/[\\%_]/g, (c) => '\\' + c)}%`;
      where.push("(s.title LIKE ? ESCAPE '\\' OR s.notes LIKE ? ESCAPE '\\')");
      args.push(like, like);
    }
    if (filter.rig !== undefined) {
      where.push('s.rig_name = ?');
      args.push(filter.rig);
    }
    if (filter.part !== undefined) {
      // Through session_mounts' index on (part_id, revision): the sessions a part (revision) ran in.
      where.push('EXISTS (SELECT 1 FROM session_mounts m WHERE m.session_id = s.id AND m.part_id = ? AND (? IS NULL OR m.revision = ?))');
      args.push(filter.part, filter.partRevision ?? null, filter.partRevision ?? null);
    }
    if (filter.from !== undefined) {
      where.push('s.started_at >= ?');
      args.push(filter.from);
    }
    if (filter.to !== undefined) {
      where.push('s.started_at < ?');
      args.push(filter.to);
    }
    if (filter.outcome !== undefined) {
      const outs = Array.isArray(filter.outcome) ? filter.outcome : [filter.outcome];
      for (const o of outs) if (!SESSION_OUTCOMES.includes(o)) throw new InvalidInput(`unknown outcome ${JSON.stringify(o)}`);
      where.push(`s.outcome IN (${outs.map(() => '?').join(', ') || 'NULL'})`);
      args.push(...outs);
    }
    const sql =
      `SELECT ${SUMMARY_COLUMNS} FROM sessions s` +
      (where.length ? ` WHERE ${where.join(' AND ')}` : '') +
      ' ORDER BY s.started_at DESC, s.id DESC' +
      ` LIMIT ${Math.max(0, Math.floor(filter.limit ?? -1)) || -1} OFFSET ${Math.max(0, Math.floor(filter.offset ?? 0))}`;
    return (this.db.prepare(sql).all(...args) as SessionRow[]).map((r) => this.present(toSummary(r)));
  }

  summary(id: number): SessionSummary {
    this.assertOpen();
    const row = this.st.summary.get(id) as SessionRow | undefined;
    if (!row) throw new SessionNotFound(id);
    return this.present(toSummary(row));
  }

  /** Context, operating points and events of one session (samples separately: they can be millions). */
  get(id: number): SessionRecord {
    this.assertOpen();
    const read = this.db.transaction(() => {
      const row = this.st.full.get(id) as FullRow | undefined;
      if (!row) throw new SessionNotFound(id);
      const points = (this.st.points.all(id) as string[]).map((s) => JSON.parse(s) as OperatingPoint);
      const events = (this.st.events.all(id) as { t: number; level: StoredEvent['level']; kind: string; text: string; data_json: string | null }[]).map(
        (e): StoredEvent => ({ t: e.t, level: e.level, kind: e.kind, text: e.text, ...(e.data_json !== null ? { data: JSON.parse(e.data_json) } : {}) }),
      );
      const shown = this.present(toSummary(row));
      if (shown.outcome !== row.outcome) events.push({ t: shown.ended_at ?? row.started_at, level: 'warn', kind: 'session', text: `${INTERRUPTED_TEXT} (not yet written: the store was opened read-only)` });
      return {
        ...shown,
        rig: parse(row.rig_json),
        calibration: parse(row.calibration_json),
        atmosphere: parse(row.atmosphere_json),
        firmware: parse(row.firmware_json),
        sequence: parse(row.sequence_json),
        mount: this.st.mount.all(id) as MountedPart[],
        points,
        events,
      } as SessionRecord;
    });
    return read();
  }

  /** Samples of a session as columns, optionally within a time window and thinned to about N points. */
  samples(id: number, q: SampleQuery = {}): SampleBatch {
    return rowsToBatch(this.sampleRows(id, q));
  }

  /** The same as samples() as rows (t, dt, then the channels in schema order). */
  sampleRows(id: number, q: SampleQuery = {}): SampleRow[] {
    this.assertOpen();
    if (!this.st.exists.get(id)) throw new SessionNotFound(id);
    const from = q.from ?? -Infinity;
    const to = q.to ?? Infinity;
    const d = q.decimate;
    let dec = keepAll();
    if (d) {
      if (!(Number.isInteger(d.points) && d.points >= 2)) throw new InvalidInput('decimation needs at least 2 points');
      const r = this.sampleRange(id, from, to);
      if (r.n > d.points) {
        if (d.method === 'stride') dec = strideDecimator(r.n, d.points);
        else {
          const col = SAMPLE_COLUMNS.indexOf(d.channel ?? 'thrust');
          if (col < 0) throw new InvalidInput(`unknown channel ${JSON.stringify(d.channel)}`);
          dec = minmaxDecimator(r.t0, r.t1, d.points, col + 2);
        }
      }
    }
    for (const chunk of this.rowChunks(id, from, to)) for (let i = 0; i < chunk.length; i++) dec.push(chunk[i]);
    return dec.finish();
  }

  /** Streams every sample row of a session in time order (export), a block at a time. */
  *iterateSamples(id: number): IterableIterator<SampleRow> {
    this.assertOpen();
    if (!this.st.exists.get(id)) throw new SessionNotFound(id);
    for (const chunk of this.rowChunks(id, -Infinity, Infinity)) yield* chunk;
  }

  /** Rows with from <= t < to in (t, insertion) order, the old `ORDER BY t, rowid`, in chunks of at most a block. */
  private rowChunks(id: number, from: number, to: number): Generator<SampleRow[]> {
    const data = this.st.blockData;
    return orderedRows(this.st.blocks.iterate(id, to, from) as IterableIterator<BlockEntry>, (b) => data.get(b.id) as Uint8Array, from, to);
  }

  /** Count and smallest and largest t of the rows with from <= t < to (0 rows: t0 and t1 are infinite). */
  private sampleRange(id: number, from: number, to: number): { n: number; t0: number; t1: number } {
    const inside = this.st.rangeInside.get(id, from, to) as { n: number; t0: number | null; t1: number | null };
    let n = inside.n;
    let t0 = inside.t0 ?? Infinity;
    let t1 = inside.t1 ?? -Infinity;
    for (const e of this.st.rangeEdges.all({ id, from, to }) as { id: number; n: number }[]) {
      const r = blockRange(this.st.blockData.get(e.id) as Uint8Array, e.n, from, to);
      n += r.n;
      if (r.t0 < t0) t0 = r.t0;
      if (r.t1 > t1) t1 = r.t1;
    }
    return { n, t0, t1 };
  }

  update(id: number, patch: SessionPatch): SessionSummary {
    this.assertOpen();
    const add = (patch.addTags ?? []).map(normalizeTag);
    const remove = (patch.removeTags ?? []).map(normalizeTag);
    this.db.transaction(() => {
      if (!this.st.exists.get(id)) throw new SessionNotFound(id);
      if (patch.title !== undefined) this.db.prepare('UPDATE sessions SET title = ? WHERE id = ?').run(patch.title, id);
      if (patch.notes !== undefined) this.db.prepare('UPDATE sessions SET notes = ? WHERE id = ?').run(patch.notes, id);
      for (const t of remove) this.st.deleteTag.run(id, t);
      for (const t of add) this.st.insertTag.run(id, t);
    })();
    return this.summary(id);
  }

  /** Deletes a session with its samples, points, events and tags. A session being recorded here cannot be deleted. */
  delete(id: number): void {
    this.assertOpen();
    if ([...this.recorders].some((r) => r.id === id)) throw new InvalidInput(`session ${id} is being recorded; finish it first`);
    const info = this.st.deleteSession.run(id);
    if (info.changes === 0) throw new SessionNotFound(id);
  }

  /** Flushes live recorders (without finishing them) and closes the file. */
  close(): void {
    if (this.closed) return;
    for (const r of [...this.recorders]) r.close();
    this.closed = true;
    this.db.close();
  }

  private assertOpen(): void {
    if (this.closed) throw new InvalidInput('the session store is closed');
  }
}

function toSummary(r: SessionRow): SessionSummary {
  return {
    id: r.id,
    title: r.title,
    notes: r.notes,
    tags: JSON.parse(r.tags_json) as string[],
    outcome: r.outcome,
    started_at: r.started_at,
    ended_at: r.ended_at,
    rig_name: r.rig_name,
    sample_count: r.sample_count,
    point_count: r.point_count,
  };
}

export type { FinalOutcome };
