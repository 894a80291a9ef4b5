// Session store benchmark: batched sample inserts through the recorder beside two baselines measured in the same
// run, and comparing two one-hour sessions read back from the store. Targets: >= 200,000 samples/s, <= 200 ms
// for the comparison. Numbers only; nothing here asserts.
//
// Samples are stored in blocks (server/store/blocks.ts). The baselines: the same rows one per transaction
// through writeBatch (what an unbuffered recorder would do: one block per sample), and the layout blocks
// replaced, one SQLite row per sample, as a bare prepared INSERT loop in one transaction into a table of that
// layout (with its index) in a fresh file beside the others. That loop was the old writeBatch's whole cost per
// sample, and it was once the ceiling the recorder approached; the recorder over it is now the gain of blocks.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import type { Sample } from '../server/bench/telemetry.js';
import { compareSessions } from '../server/compare/compare.js';
import { idealSession } from '../server/compare/synthetic.js';
import { SessionStore } from '../server/store/store.js';

export interface StoreBenchResult {
  /** Recorder path (buffered, one transaction per batch), one hour at 500 samples/s. */
  insert_samples_per_s: number;
  /** Baseline: the same rows, one transaction each (what an unbuffered recorder would do). */
  baseline_one_per_transaction_samples_per_s: number;
  /** Baseline: the old one-row-per-sample layout, a bare prepared INSERT loop in one big transaction, no recorder. */
  baseline_plain_loop_samples_per_s: number;
  /**
   * writeBatch alone on 100 batches of 4096 samples built beforehand, microseconds per sample, including the WAL
   * checkpoints SQLite runs inside the commits (bench/run.ts does not print it; benchStore() returns it).
   */
  write_batch_us_per_sample: number;
  /** Read two one-hour sessions (context and points) and compare them with a hover verdict; median of runs. */
  compare_two_hour_sessions_ms: number;
  samples_per_session: number;
  points_per_session: number;
}

const RATE_HZ = 500;
const HOUR_S = 3600;

function makeSample(i: number, t0: number): Sample {
  return {
    t: t0 + i * (1000 / RATE_HZ),
    dt: i / RATE_HZ,
    thrust: 2 + Math.sin(i * 0.001),
    voltage: 14.8 - (i % 1000) * 1e-4,
    current: 3 + (i % 17) * 0.01,
    power: 44 + (i % 13) * 0.1,
    rpm: i % 5 === 0 ? 7000 + (i % 300) : null,
    temp: i % 50 === 0 ? 30 : null,
    torque: null,
    out: 0.4,
  };
}

function median(xs: number[]): number {
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.floor(s.length / 2)];
}

/** One hour of a sweep repeated: 5 s a step, points every step. */
function hourSession(store: SessionStore, sigma: number | null, t0: number): { id: number; seconds: number; samples: number; points: number } {
  const steps = HOUR_S / 5;
  const thrusts = Array.from({ length: steps }, (_, k) => {
    const x = 0.1 + 0.9 * ((k % 24) / 23);
    return 9 * x * x + 0.02 * Math.sin(k);
  });
  const demo = idealSession({ id: 0, sigma, thrusts, relStd: 0.015, powerScale: 1 / 0.6, duct_mass_kg: sigma === null ? 0 : 0.06, t0 });
  const rec = store.record({ title: sigma === null ? 'bench: open hour' : 'bench: ducted hour', tags: ['bench'], rig: demo.rig, started_at: t0 });
  const n = HOUR_S * RATE_HZ;
  const perStep = n / steps;
  const start = performance.now();
  for (let i = 0; i < n; i++) {
    rec.addSample(makeSample(i, t0));
    if ((i + 1) % perStep === 0) rec.addPoint(demo.points[(i + 1) / perStep - 1]);
  }
  rec.finish('completed');
  return { id: rec.id, seconds: (performance.now() - start) / 1000, samples: n, points: steps };
}

export async function benchStore(): Promise<StoreBenchResult> {
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-store-bench-'));
  try {
    const t0 = 1_700_000_000_000;
    // Baselines first, each in its own fresh store, the same rows as the recorder writes.
    const one = SessionStore.open(join(dir, 'one'));
    const oneId = one.createSession({ title: 'baseline: one per transaction' }, 'completed');
    const ONE_N = 3000;
    let start = performance.now();
    for (let i = 0; i < ONE_N; i++) one.writeBatch(oneId, [makeSample(i, t0)]);
    const onePerTx = ONE_N / ((performance.now() - start) / 1000);
    one.close();

    const plain = SessionStore.open(join(dir, 'plain'));
    const plainId = plain.createSession({ title: 'baseline: plain loop' }, 'completed');
    // The table and index as schema migration 1 made them, before samples moved into blocks.
    plain.db.exec(`
      CREATE TABLE samples (
        session_id INTEGER NOT NULL REFERENCES sessions (id) ON DELETE CASCADE,
        t REAL NOT NULL,
        dt REAL,
        thrust REAL, voltage REAL, current REAL, power REAL, rpm REAL, temp REAL, torque REAL, out REAL
      );
      CREATE INDEX samples_session_t ON samples (session_id, t);
    `);
    const ins = plain.db.prepare('INSERT INTO samples (session_id, t, dt, thrust, voltage, current, power, rpm, temp, torque, out) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)');
    const PLAIN_N = 400_000;
    start = performance.now();
    plain.db.transaction(() => {
      for (let i = 0; i < PLAIN_N; i++) {
        const s = makeSample(i, t0);
        ins.run(plainId, s.t, s.dt, s.thrust, s.voltage, s.current, s.power, s.rpm, s.temp, s.torque, s.out);
      }
    })();
    const plainRate = PLAIN_N / ((performance.now() - start) / 1000);
    plain.close();

    const wb = SessionStore.open(join(dir, 'write-batch'));
    const wbId = wb.createSession({ title: 'writeBatch alone' }, 'completed');
    const WB_BATCHES = 100;
    const batches = Array.from({ length: WB_BATCHES }, (_, b) => Array.from({ length: 4096 }, (_, i) => makeSample(b * 4096 + i, t0)));
    start = performance.now();
    for (const batch of batches) wb.writeBatch(wbId, batch);
    const wbUs = ((performance.now() - start) * 1000) / (WB_BATCHES * 4096);
    wb.close();

    const store = SessionStore.open(join(dir, 'main'));
    const a = hourSession(store, null, t0);
    const b = hourSession(store, 1.05, t0 + 2 * HOUR_S * 1000);
    const insertRate = (a.samples + b.samples) / (a.seconds + b.seconds);

    const times: number[] = [];
    for (let k = 0; k < 7; k++) {
      const s = performance.now();
      const sa = store.get(a.id);
      const sb = store.get(b.id);
      compareSessions([sa, sb], { gridPoints: 21, vehicle: { mass_kg: 1.4, motors: 4, battery_wh: 55 } });
      times.push(performance.now() - s);
    }
    store.close();
    return {
      insert_samples_per_s: insertRate,
      baseline_one_per_transaction_samples_per_s: onePerTx,
      baseline_plain_loop_samples_per_s: plainRate,
      write_batch_us_per_sample: wbUs,
      compare_two_hour_sessions_ms: median(times),
      samples_per_session: a.samples,
      points_per_session: a.points,
    };
  } finally {
    rmSync(dir, { recursive: true, force: true });
  }
}
