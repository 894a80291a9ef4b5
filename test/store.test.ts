// Session store: create, record, query, tag, delete, recover, and a full disk while recording.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterEach, describe, expect, it } from 'vitest';
import type { Sample } from '../server/bench/telemetry.js';
import { idealSession } from '../server/compare/synthetic.js';
import { InvalidInput, SessionNotFound } from '../server/store/errors.js';
import type { RecorderWriteError } from '../server/store/recorder.js';
import { DB_FILE, SessionStore } from '../server/store/store.js';

const dirs: string[] = [];
function tempDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'ductbench-store-'));
  dirs.push(d);
  return d;
}
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});

function sample(i: number, t0 = 1_700_000_000_000): Sample {
  return {
    t: t0 + i * 2,
    dt: 10 + i * 0.002,
    thrust: 1 + Math.sin(i / 50),
    voltage: 14.8,
    current: 3 + (i % 7) * 0.01,
    power: 44.4,
    rpm: i % 5 === 0 ? 7000 + i : null,
    temp: null,
    torque: null,
    out: 0.4,
  };
}

describe('session store', () => {
  it('records a session and reads back samples, points, events and context', () => {
    const store = SessionStore.open(tempDir());
    const demo = idealSession({ id: 0, sigma: 1, thrusts: [1, 2, 3], duct_mass_kg: 0.03 });
    const rec = store.record({ title: 'Ducted sweep A', notes: 'lip 8 mm', tags: ['ducted', 'sweep'], rig: demo.rig, atmosphere: { density_kg_m3: 1.2, source: 'measured' }, started_at: 1_700_000_000_000 });
    for (let i = 0; i < 1000; i++) rec.addSample(sample(i));
    for (const p of demo.points) rec.addPoint(p);
    rec.addEvent({ t: 1_700_000_001_000, level: 'warn', kind: 'trip', text: 'current limit', data: { rule: 'max_current', value: 41, limit: 40 } });
    expect(rec.finish('tripped', 1_700_000_002_000)).toMatchObject({ complete: true, outcome_written: true });

    const s = store.get(rec.id);
    expect(s.title).toBe('Ducted sweep A');
    expect(s.tags).toEqual(['ducted', 'sweep']);
    expect(s.outcome).toBe('tripped');
    expect(s.ended_at).toBe(1_700_000_002_000);
    expect(s.sample_count).toBe(1000);
    expect(s.point_count).toBe(3);
    expect(s.rig?.duct?.mass_kg).toBe(0.03);
    expect(s.atmosphere?.density_kg_m3).toBe(1.2);
    expect(s.points.map((p) => p.channels.thrust?.mean)).toEqual([1, 2, 3]);
    const trip = s.events.find((e) => e.kind === 'trip')!;
    expect(trip.data).toEqual({ rule: 'max_current', value: 41, limit: 40 });
    expect(s.events.at(-1)!.text).toBe('session tripped');

    const b = store.samples(rec.id);
    expect(b.t).toHaveLength(1000);
    expect(b.rpm[0]).toBe(7000);
    expect(b.rpm[1]).toBeNull();
    expect(b.temp.every((x) => x === null)).toBe(true);
    expect(b.thrust[123]).toBeCloseTo(sample(123).thrust!, 12);
    store.close();
  });

  it('decimates by stride and by min/max, keeping extremes', () => {
    const store = SessionStore.open(tempDir());
    const rec = store.record({ title: 'long' });
    for (let i = 0; i < 10_000; i++) {
      const s = sample(i);
      if (i === 4321) s.thrust = 99; // a spike a stride would step over
      rec.addSample(s);
    }
    rec.finish('completed');
    const stride = store.samples(rec.id, { decimate: { method: 'stride', points: 100 } });
    expect(stride.t.length).toBeLessThanOrEqual(100);
    expect(stride.t.length).toBeGreaterThan(90);
    expect(stride.thrust).not.toContain(99);
    const mm = store.samples(rec.id, { decimate: { method: 'minmax', points: 100, channel: 'thrust' } });
    expect(mm.t.length).toBeLessThanOrEqual(100);
    expect(mm.thrust).toContain(99);
    for (let i = 1; i < mm.t.length; i++) expect(mm.t[i]).toBeGreaterThan(mm.t[i - 1]);
    const window = store.samples(rec.id, { from: sample(100).t, to: sample(200).t });
    expect(window.t).toHaveLength(100);
    store.close();
  });

  it('lists with filters, updates tags and text, deletes with samples', () => {
    const store = SessionStore.open(tempDir());
    const rigA = idealSession({ id: 0, sigma: null, thrusts: [1, 2] }).rig!;
    const a = store.createSession({ title: 'Open baseline', tags: ['open'], rig: rigA, started_at: 1000 }, 'completed');
    const b = store.createSession({ title: 'Ducted', notes: 'Tight tip clearance', tags: ['ducted', 'tight'], started_at: 2000 }, 'completed');
    const c = store.createSession({ title: 'Aborted try', tags: ['ducted'], started_at: 3000 }, 'aborted');
    store.writeBatch(b, [sample(0), sample(1)]);
    expect(store.list().map((s) => s.id)).toEqual([c, b, a]);
    expect(store.list({ tag: 'ducted' }).map((s) => s.id)).toEqual([c, b]);
    expect(store.list({ tag: ['ducted', 'tight'] }).map((s) => s.id)).toEqual([b]);
    expect(store.list({ text: 'TIP clear' }).map((s) => s.id)).toEqual([b]);
    expect(store.list({ text: '100%' })).toEqual([]);
    expect(store.list({ rig: rigA.name }).map((s) => s.id)).toEqual([a]);
    expect(store.list({ from: 1500, to: 3000 }).map((s) => s.id)).toEqual([b]);
    expect(store.list({ outcome: 'aborted' }).map((s) => s.id)).toEqual([c]);
    expect(store.list({ limit: 1, offset: 1 }).map((s) => s.id)).toEqual([b]);
    expect(store.summary(b).sample_count).toBe(2);

    const u = store.update(b, { title: 'Ducted, tight', addTags: ['keep', ' tight '], removeTags: ['ducted'] });
    expect(u.title).toBe('Ducted, tight');
    expect(u.tags).toEqual(['keep', 'tight']);
    expect(() => store.update(b, { addTags: ['a,b'] })).toThrow(InvalidInput);

    store.delete(b);
    expect(() => store.get(b)).toThrow(SessionNotFound);
    expect(() => store.delete(b)).toThrow(SessionNotFound);
    const raw = new Database(join(store.dataDir, DB_FILE), { readonly: true });
    expect(raw.prepare('SELECT count(*) FROM sample_blocks').pluck().get()).toBe(0);
    expect(raw.prepare('SELECT count(*) FROM session_tags WHERE session_id = ?').pluck().get(b)).toBe(0);
    raw.close();
    store.close();
  });

  it('marks a running session left by a dead process as interrupted on open', () => {
    const dir = tempDir();
    const store = SessionStore.open(dir);
    const rec = store.record({ title: 'will be cut' });
    for (let i = 0; i < 50; i++) rec.addSample(sample(i));
    rec.flush();
    // Pretend the recorder belonged to a process that has since died.
    store.db.prepare('UPDATE sessions SET recorder_pid = ? WHERE id = ?').run(2 ** 22 + 12345, rec.id);
    // A second store in this process sees a running session whose owner is gone.
    const other = SessionStore.open(dir);
    const s = other.get(rec.id);
    expect(s.outcome).toBe('interrupted');
    expect(s.ended_at).toBe(sample(49).t);
    expect(s.events.some((e) => e.kind === 'session' && /interrupted/.test(e.text))).toBe(true);
    other.close();
    store.close();
  });

  it('leaves a session alone while its recorder is alive', () => {
    const dir = tempDir();
    const store = SessionStore.open(dir);
    const rec = store.record({ title: 'live' });
    rec.addSample(sample(0));
    rec.flush();
    const reader = SessionStore.open(dir);
    expect(reader.get(rec.id).outcome).toBe('running');
    reader.close();
    rec.finish('completed');
    store.close();
  });

  it('survives a full disk: keeps recent data in memory, reports, and recovers', () => {
    const dir = tempDir();
    // A size cap makes SQLite answer SQLITE_FULL exactly as a full disk does.
    const store = SessionStore.open(dir, { maxDatabaseBytes: 256 * 1024 });
    const errors: RecorderWriteError[] = [];
    let recovered = 0;
    const rec = store.record({ title: 'disk fills' }, { maxBatch: 500, maxPendingSamples: 20_000, onError: (e) => errors.push(e), onRecovered: () => recovered++ });
    let i = 0;
    while (errors.length === 0 && i < 200_000) rec.addSample(sample(i++));
    expect(errors[0].code).toBe('SQLITE_FULL');
    expect(errors[0].sessionId).toBe(rec.id);
    // Keep recording well past the memory bound: nothing throws, memory stays bounded, the oldest go first.
    for (let k = 0; k < 50_000; k++) rec.addSample(sample(i++));
    expect(rec.pending.samples).toBeLessThanOrEqual(20_000);
    expect(rec.pending.samples).toBeGreaterThanOrEqual(20_000 - 500);
    expect(rec.droppedSamples).toBeGreaterThan(0);
    expect(rec.flush()).toBe(false);
    // The operator frees space: the next flushes write what was kept, in bounded chunks (a few ticks' worth).
    store.db.pragma('max_page_count = 1073741823');
    let flushes = 1;
    while (!rec.flush() && flushes < 100) flushes++;
    expect(rec.pending.samples).toBe(0);
    expect(flushes).toBeGreaterThan(1);
    expect(recovered).toBe(1);
    // Written whole since, but the samples dropped while memory was full are gone: the record says so.
    expect(rec.finish('completed')).toEqual({ complete: false, outcome_written: true, samples_taken: i, samples_kept: i - rec.droppedSamples, points_taken: 0, points_kept: 0 });
    expect(store.get(rec.id).events.some((e) => e.kind === 'recording_incomplete')).toBe(true);
    const s = store.summary(rec.id);
    expect(s.outcome).toBe('completed');
    expect(s.sample_count).toBe(i - rec.droppedSamples);
    // The newest sample is there: what was dropped was the oldest of the backlog.
    const last = store.samples(rec.id, { from: sample(i - 1).t });
    expect(last.t).toEqual([sample(i - 1).t]);
    store.close();
  });

  it('flushes on its timer without being asked', async () => {
    const store = SessionStore.open(tempDir());
    const rec = store.record({ title: 'timer' }, { flushIntervalMs: 20 });
    rec.addSample(sample(0));
    const deadline = Date.now() + 10_000;
    while (store.summary(rec.id).sample_count === 0 && Date.now() < deadline) await new Promise((r) => setTimeout(r, 5));
    expect(store.summary(rec.id).sample_count).toBe(1);
    rec.finish('completed');
    store.close();
  });

  it('refuses to delete a session being recorded and reports unknown ids', () => {
    const store = SessionStore.open(tempDir());
    const rec = store.record();
    expect(() => store.delete(rec.id)).toThrow(InvalidInput);
    expect(() => store.samples(999)).toThrow(SessionNotFound);
    expect(() => store.update(999, { title: 'x' })).toThrow(SessionNotFound);
    rec.finish('aborted');
    store.close();
  });
});
