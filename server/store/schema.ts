// The database layout and its history. A migration is appended, never edited once released: a database
// written by any earlier ductbench is carried forward step by step, each step in its own transaction with the
// version bump, so a crash mid-upgrade leaves the file at the last whole step. PRAGMA user_version holds how
// many steps have been applied.

import type Database from 'better-sqlite3';
import { BLOCK_COLUMNS, MAX_BLOCK_ROWS, packRows } from './blocks.js';
import type { SampleRow } from './decimate.js';
import { SchemaTooNew } from './errors.js';

export interface Migration {
  /** What the step changes, for people reading an upgrade log. */
  summary: string;
  up(db: Database.Database): void;
}

/** Sample channels stored as REAL columns (NULL where the frame did not carry the channel). */
export const SAMPLE_COLUMNS = ['thrust', 'voltage', 'current', 'power', 'rpm', 'temp', 'torque', 'out'] as const;

export const MIGRATIONS: readonly Migration[] = [
  {
    summary: 'sessions, tags, samples, operating points, events',
    up(db) {
      db.exec(`
        CREATE TABLE sessions (
          id INTEGER PRIMARY KEY AUTOINCREMENT,
          title TEXT NOT NULL DEFAULT '',
          notes TEXT NOT NULL DEFAULT '',
          outcome TEXT NOT NULL CHECK (outcome IN ('running', 'completed', 'tripped', 'aborted', 'interrupted')),
          started_at REAL NOT NULL,
          ended_at REAL,
          rig_name TEXT,
          rig_json TEXT,
          calibration_json TEXT,
          atmosphere_json TEXT,
          firmware_json TEXT,
          sequence_json TEXT,
          -- Who is recording a running session, and when it last wrote: lets a later open tell a live
          -- recorder in another process from one that died.
          recorder_pid INTEGER,
          heartbeat_at REAL
        );
        CREATE INDEX sessions_started ON sessions (started_at);
        CREATE INDEX sessions_rig ON sessions (rig_name);

        CREATE TABLE session_tags (
          session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
          tag TEXT NOT NULL,
          PRIMARY KEY (session_id, tag)
        ) WITHOUT ROWID;
        CREATE INDEX session_tags_tag ON session_tags (tag);

        CREATE TABLE samples (
          session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
          t REAL NOT NULL,
          dt REAL,
          thrust REAL, voltage REAL, current REAL, power REAL, rpm REAL, temp REAL, torque REAL, out REAL
        );
        CREATE INDEX samples_session_t ON samples (session_id, t);

        CREATE TABLE points (
          session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
          idx INTEGER NOT NULL,
          throttle REAL NOT NULL,
          thrust REAL,
          power REAL,
          t_start REAL NOT NULL,
          json TEXT NOT NULL
        );
        CREATE INDEX points_session ON points (session_id, idx);
        CREATE INDEX points_throttle ON points (throttle);
        CREATE INDEX points_thrust ON points (thrust);

        CREATE TABLE events (
          session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
          t REAL NOT NULL,
          level TEXT NOT NULL CHECK (level IN ('info', 'warn', 'error')),
          kind TEXT NOT NULL,
          text TEXT NOT NULL,
          data_json TEXT
        );
        CREATE INDEX events_session ON events (session_id, t);
      `);
    },
  },
  {
    // Counting a few million sample rows for every line of `sessions list` is slow; keep the count on the
    // session row (the recorder bumps it in the same transaction as the rows) and backfill old sessions.
    summary: 'sample count kept on the session row; events indexed by kind',
    up(db) {
      db.exec(`
        ALTER TABLE sessions ADD COLUMN sample_count INTEGER NOT NULL DEFAULT 0;
        UPDATE sessions SET sample_count = (SELECT count(*) FROM samples WHERE samples.session_id = sessions.id);
        CREATE INDEX events_kind ON events (session_id, kind);
      `);
    },
  },
  {
    // One row per sample made recording cost ~1.6 us a sample (see blocks.ts): samples now live in blocks of up
    // to 4096, one blob each. The index carries t1 and n beside (session_id, t0) so that finding the blocks of a
    // time window, counting its rows and a session's last time are answered from the index without reading
    // the blobs' pages.
    summary: 'samples stored in blocks of up to 4096 rows (one float64 blob each) instead of one row per sample',
    up(db) {
      db.exec(`
        CREATE TABLE sample_blocks (
          session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
          t0 REAL NOT NULL,
          t1 REAL NOT NULL,
          n INTEGER NOT NULL,
          data BLOB NOT NULL
        );
        CREATE INDEX sample_blocks_session_t0 ON sample_blocks (session_id, t0, t1, n);
      `);
      const cols = `t, dt, ${SAMPLE_COLUMNS.join(', ')}`;
      // Rows whose session is gone (a file written without foreign keys) could not be read before either.
      const sessions = db.prepare('SELECT id FROM sessions s WHERE EXISTS (SELECT 1 FROM samples WHERE session_id = s.id) ORDER BY id').pluck().all() as number[];
      const first = db.prepare(`SELECT rowid, ${cols} FROM samples WHERE session_id = ? ORDER BY t, rowid LIMIT ${MAX_BLOCK_ROWS}`).raw();
      // Keyset paging in the old read order (t, rowid): each chunk starts where the last ended, through the index,
      // so memory stays at one block whatever the session's length.
      const after = db.prepare(`SELECT rowid, ${cols} FROM samples WHERE session_id = ? AND (t, rowid) > (?, ?) ORDER BY t, rowid LIMIT ${MAX_BLOCK_ROWS}`).raw();
      const insert = db.prepare('INSERT INTO sample_blocks (session_id, t0, t1, n, data) VALUES (?, ?, ?, ?, ?)');
      const scratch = new Float64Array(MAX_BLOCK_ROWS * BLOCK_COLUMNS);
      for (const id of sessions) {
        let chunk = first.all(id) as (number | null)[][];
        while (chunk.length > 0) {
          const last = chunk[chunk.length - 1];
          const b = packRows(chunk.map((r): SampleRow => r.slice(1)), { scratch });
          insert.run(id, b.t0, b.t1, b.n, b.data);
          if (chunk.length < MAX_BLOCK_ROWS) break;
          chunk = after.all(id, last[1], last[0]) as (number | null)[][];
        }
      }
      db.exec(`
        DROP INDEX samples_session_t;
        DROP TABLE samples;
        UPDATE sessions SET sample_count = (SELECT coalesce(sum(n), 0) FROM sample_blocks WHERE sample_blocks.session_id = sessions.id);
      `);
    },
  },
  {
    // The parts library (server/parts/): a part is a name and a kind; what it is lives in its revisions, which
    // are never changed (the triggers refuse it), so a session's link to (part, revision) always finds the
    // hardware it ran with. A part is retired, never deleted, while any session names it.
    summary: 'parts library (parts, immutable part revisions) and the mount each session ran with',
    up(db) {
      db.exec(`
        CREATE TABLE parts (
          id INTEGER PRIMARY KEY AUTOINCREMENT,
          kind TEXT NOT NULL CHECK (kind IN ('propeller', 'motor', 'esc', 'supply', 'duct')),
          name TEXT NOT NULL,
          created_at REAL NOT NULL,
          retired_at REAL
        );
        CREATE UNIQUE INDEX parts_active_name ON parts (kind, name) WHERE retired_at IS NULL;

        CREATE TABLE part_revisions (
          part_id INTEGER NOT NULL REFERENCES parts (id),
          revision INTEGER NOT NULL CHECK (revision >= 1),
          spec_json TEXT NOT NULL,
          notes TEXT NOT NULL DEFAULT '',
          limits_json TEXT NOT NULL DEFAULT '{}',
          created_at REAL NOT NULL,
          PRIMARY KEY (part_id, revision)
        ) WITHOUT ROWID;
        CREATE TRIGGER part_revisions_no_update BEFORE UPDATE ON part_revisions
          BEGIN SELECT RAISE(ABORT, 'a part revision is never changed: add the next revision'); END;
        CREATE TRIGGER part_revisions_no_delete BEFORE DELETE ON part_revisions
          BEGIN SELECT RAISE(ABORT, 'a part revision is never deleted: retire the part'); END;

        CREATE TABLE session_mounts (
          session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
          slot TEXT NOT NULL CHECK (slot IN ('propeller', 'motor', 'esc', 'supply', 'duct')),
          part_id INTEGER NOT NULL,
          revision INTEGER NOT NULL,
          PRIMARY KEY (session_id, slot),
          FOREIGN KEY (part_id, revision) REFERENCES part_revisions (part_id, revision)
        ) WITHOUT ROWID;
        CREATE INDEX session_mounts_part ON session_mounts (part_id, revision);
      `);
    },
  },
];

export const SCHEMA_VERSION = MIGRATIONS.length;

export function schemaVersion(db: Database.Database): number {
  return db.pragma('user_version', { simple: true }) as number;
}

/**
 * Applies the migrations the database has not seen, up to `target` (tests stop early to build an old file).
 * Returns the versions applied.
 */
export function migrate(db: Database.Database, target: number = SCHEMA_VERSION): number[] {
  const found = schemaVersion(db);
  if (found > SCHEMA_VERSION) throw new SchemaTooNew(found, SCHEMA_VERSION);
  const applied: number[] = [];
  for (let v = found; v < Math.min(target, SCHEMA_VERSION); v++) {
    const step = MIGRATIONS[v];
    db.transaction(() => {
      step.up(db);
      // user_version lives in the file header and is written inside the transaction, so step and bump
      // commit together or not at all.
      db.pragma(`user_version = ${v + 1}`);
    })();
    applied.push(v + 1);
  }
  return applied;
}
