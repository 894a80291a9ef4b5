// Schema migrations: a database file written by the first release (only migration 1 applied), or by one with
// one row per sample (up to migration 2), opens with the current code, keeps its data exactly, and gains what
// later migrations add.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterEach, expect, it } from 'vitest';
import { MAX_BLOCK_ROWS } from '../server/store/blocks.js';
import type { SampleRow } from '../server/store/decimate.js';
import { SchemaTooNew } from '../server/store/errors.js';
import { migrate, MIGRATIONS, SAMPLE_COLUMNS, SCHEMA_VERSION, schemaVersion } from '../server/store/schema.js';
import { DB_FILE, SessionStore } from '../server/store/store.js';

const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});
function tempDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'ductbench-mig-'));
  dirs.push(d);
  return d;
}

it('has more than one migration, so the upgrade path is exercised', () => {
  expect(MIGRATIONS.length).toBeGreaterThanOrEqual(3);
  expect(SCHEMA_VERSION).toBe(MIGRATIONS.length);
});

it('opens a v1 file, keeps its data and applies the later steps', () => {
  const dir = tempDir();
  const v1 = new Database(join(dir, DB_FILE));
  v1.pragma('journal_mode = WAL');
  expect(migrate(v1, 1)).toEqual([1]);
  expect(schemaVersion(v1)).toBe(1);
  // Written with the v1 layout only (no sample_count column yet), as the first release would have.
  const id = Number(
    v1.prepare("INSERT INTO sessions (title, notes, outcome, started_at, ended_at, rig_name) VALUES ('Old sweep', 'first bench', 'completed', 1000, 5000, 'Quorrel open')").run()
      .lastInsertRowid,
  );
  v1.prepare('INSERT INTO session_tags (session_id, tag) VALUES (?, ?)').run(id, 'legacy');
  const ins = v1.prepare('INSERT INTO samples (session_id, t, dt, thrust, power) VALUES (?, ?, ?, ?, ?)');
  for (let i = 0; i < 25; i++) ins.run(id, 1000 + i, i / 1000, 0.1 * i, 2 * i);
  v1.prepare("INSERT INTO events (session_id, t, level, kind, text) VALUES (?, 1500, 'info', 'note', 'lip sanded')").run(id);
  expect(() => v1.prepare('SELECT sample_count FROM sessions').get()).toThrow(/no such column/);
  v1.close();

  const store = SessionStore.open(dir);
  expect(schemaVersion(store.db)).toBe(SCHEMA_VERSION);
  const s = store.get(id);
  expect(s.title).toBe('Old sweep');
  expect(s.tags).toEqual(['legacy']);
  expect(s.rig_name).toBe('Quorrel open');
  // Migration 2 backfilled the count from the rows that were there.
  expect(s.sample_count).toBe(25);
  expect(s.events.map((e) => e.text)).toEqual(['lip sanded']);
  expect(store.samples(id).thrust[10]).toBeCloseTo(1.0, 12);
  // Migration 2's index exists.
  expect(store.db.prepare("SELECT name FROM sqlite_master WHERE type = 'index' AND name = 'events_kind'").pluck().get()).toBe('events_kind');
  // New sessions work on the upgraded file.
  const rec = store.record({ title: 'new' });
  rec.addSample({ t: 9000, dt: 1, thrust: 1, voltage: null, current: null, power: null, rpm: null, temp: null, torque: null, out: null });
  rec.finish('completed');
  expect(store.summary(rec.id).sample_count).toBe(1);
  store.close();
});

it('migrating again is a no-op, and a file from a newer ductbench is refused', () => {
  const dir = tempDir();
  SessionStore.open(dir).close();
  const db = new Database(join(dir, DB_FILE));
  expect(migrate(db)).toEqual([]);
  db.pragma(`user_version = ${SCHEMA_VERSION + 1}`);
  db.close();
  expect(() => SessionStore.open(dir)).toThrow(SchemaTooNew);
});

it('a failing migration step leaves the file at the previous version', () => {
  const db = new Database(':memory:');
  migrate(db, 1);
  // Sabotage step 2: the column it adds already exists, so its ALTER fails inside the transaction.
  db.exec('ALTER TABLE sessions ADD COLUMN sample_count INTEGER');
  expect(() => migrate(db)).toThrow();
  expect(schemaVersion(db)).toBe(1);
  expect(db.prepare("SELECT name FROM sqlite_master WHERE name = 'events_kind'").get()).toBeUndefined();
  db.close();
});

const COLS = `t, dt, ${SAMPLE_COLUMNS.join(', ')}`;

/**
 * Fills an old-layout file (one row per sample) as the recorder and importer of that layout could: rows inserted
 * out of time order, equal times (many of them across what becomes a block edge), nulls in every channel, and
 * a session whose rows are interleaved with another's. Returns each session's rows as the old code read them
 * (`ORDER BY t, rowid`), the reference for what the upgraded store must give back.
 */
function fillOldSamples(db: Database.Database, withCount: boolean): Map<number, SampleRow[]> {
  const session = db.prepare(
    `INSERT INTO sessions (title, outcome, started_at, ended_at, rig_name) VALUES (?, 'completed', 1000, 90000, 'Quorrel ducted')`,
  );
  const ins = db.prepare(`INSERT INTO samples (session_id, ${COLS}) VALUES (?, ${SAMPLE_COLUMNS.map(() => '?').join(', ')}, ?, ?)`);
  const row = (i: number, t: number): SampleRow => [
    t,
    i % 9 === 4 ? null : i * 0.001,
    i % 6 === 0 ? null : Math.cos(i / 17) * 2.5,
    14.8 - i * 1e-6,
    i % 4 === 0 ? null : 3 + (i % 11) * 0.0625,
    null,
    i % 5 === 0 ? 6500 + i : null,
    i % 40 === 0 ? 29.25 : null,
    i % 3 === 0 ? 0.015625 * i : null,
    i % 8 === 7 ? null : 0.5,
  ];
  const ids: number[] = [];
  db.transaction(() => {
    const long = Number(session.run('long sweep').lastInsertRowid);
    const short = Number(session.run('short').lastInsertRowid);
    const empty = Number(session.run('no samples').lastInsertRowid);
    ids.push(long, short, empty);
    let i = 0;
    // 4096 rows, then 300 rows all at the time of the 4096th: the tie spans the first chunk's edge.
    for (; i < MAX_BLOCK_ROWS; i++) ins.run(long, ...row(i, 2000 + i));
    for (let k = 0; k < 300; k++, i++) ins.run(long, ...row(i, 2000 + MAX_BLOCK_ROWS - 1));
    for (let k = 0; k < 5000; k++, i++) {
      ins.run(long, ...row(i, 10_000 + ((k * 7919) % 5000))); // out of time order
      if (k % 1000 === 0) ins.run(short, ...row(i, 50_000 + k));
    }
    for (let k = 0; k < 4000; k++, i++) ins.run(long, ...row(i, 3000 + k * 0.5)); // back in time, into the first rows
    if (withCount) db.exec('UPDATE sessions SET sample_count = (SELECT count(*) FROM samples WHERE session_id = sessions.id)');
  })();
  const read = db.prepare(`SELECT ${COLS} FROM samples WHERE session_id = ? ORDER BY t, rowid`).raw();
  return new Map(ids.map((id) => [id, read.all(id) as SampleRow[]]));
}

function expectMigrated(dir: string, want: Map<number, SampleRow[]>): void {
  const store = SessionStore.open(dir);
  expect(schemaVersion(store.db)).toBe(SCHEMA_VERSION);
  for (const [id, rows] of want) {
    expect(store.summary(id).sample_count).toBe(rows.length);
    // Exact values, nulls where they were, and the old order (t, then insertion).
    expect(store.sampleRows(id)).toEqual(rows);
    expect([...store.iterateSamples(id)]).toEqual(rows);
    const from = 2000 + MAX_BLOCK_ROWS - 1;
    expect(store.sampleRows(id, { from, to: 10_500 })).toEqual(rows.filter((r) => (r[0] as number) >= from && (r[0] as number) < 10_500));
  }
  const master = store.db.prepare("SELECT name FROM sqlite_master WHERE name IN ('samples', 'samples_session_t')").pluck().all();
  expect(master).toEqual([]);
  const ns = store.db.prepare('SELECT n FROM sample_blocks').pluck().all() as number[];
  expect(Math.max(...ns)).toBeLessThanOrEqual(MAX_BLOCK_ROWS);
  expect(ns.reduce((a, b) => a + b, 0)).toBe([...want.values()].reduce((a, r) => a + r.length, 0));
  expect(store.db.pragma('integrity_check', { simple: true })).toBe('ok');
  expect(store.db.pragma('foreign_key_check')).toEqual([]);
  store.close();
}

it('a v1 file with one row per sample migrates to blocks and reads back the same rows', () => {
  const dir = tempDir();
  const v1 = new Database(join(dir, DB_FILE));
  migrate(v1, 1);
  const want = fillOldSamples(v1, false);
  v1.close();
  expectMigrated(dir, want);
});

it('a v2 file with one row per sample migrates to blocks and reads back the same rows', () => {
  const dir = tempDir();
  const v2 = new Database(join(dir, DB_FILE));
  migrate(v2, 2);
  expect(schemaVersion(v2)).toBe(2);
  const want = fillOldSamples(v2, true);
  // A sample row whose session was deleted without foreign keys could never be read; it is not carried over.
  v2.pragma('foreign_keys = OFF');
  v2.prepare(`INSERT INTO samples (session_id, t) VALUES (999, 1)`).run();
  v2.close();
  expectMigrated(dir, want);
});

it('a failing block migration leaves the one-row-per-sample file as it was', () => {
  const db = new Database(':memory:');
  migrate(db, 2);
  const want = fillOldSamples(db, true);
  // Sabotage step 3: the table it creates already exists.
  db.exec('CREATE TABLE sample_blocks (x)');
  expect(() => migrate(db)).toThrow();
  expect(schemaVersion(db)).toBe(2);
  const read = db.prepare(`SELECT ${COLS} FROM samples WHERE session_id = ? ORDER BY t, rowid`).raw();
  for (const [id, rows] of want) expect(read.all(id)).toEqual(rows);
  db.close();
});
