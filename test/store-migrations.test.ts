// Schema migrations: a database file written by the first release (only migration 1 applied) opens with the
// current code, keeps its data, and gains what later migrations add.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterEach, expect, it } from 'vitest';
import { SchemaTooNew } from '../server/store/errors.js';
import { migrate, MIGRATIONS, SCHEMA_VERSION, schemaVersion } from '../server/store/schema.js';
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
  expect(MIGRATIONS.length).toBeGreaterThanOrEqual(2);
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
    v1.prepare("INSERT INTO sessions (title, notes, outcome, started_at, ended_at, rig_name) VALUES ('Old sweep', 'first bench', 'completed', 1000, 5000, 'Kestrel open')").run()
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
  expect(s.rig_name).toBe('Kestrel open');
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
