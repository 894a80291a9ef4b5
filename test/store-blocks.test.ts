// Samples stored in blocks: the codec (layout, nulls, sizes, the big-endian swap) and reading back across block
// edges. The reading reference is the layout blocks replaced, computed in the test: the same samples inserted
// one row each into a plain SQLite table and read with `WHERE t >= ? AND t < ? ORDER BY t, rowid`, its window
// count/min/max from SQL, fed through the same decimators.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterEach, describe, expect, it } from 'vitest';
import type { Sample } from '../server/bench/telemetry.js';
import { BLOCK_COLUMNS, blockRow, MAX_BLOCK_ROWS, packRows, packSamples, unpackBlock } from '../server/store/blocks.js';
import { keepAll, minmaxDecimator, strideDecimator, type Decimator, type SampleRow } from '../server/store/decimate.js';
import { InvalidInput } from '../server/store/errors.js';
import { SAMPLE_COLUMNS } from '../server/store/schema.js';
import { SessionStore } from '../server/store/store.js';
import type { Decimation } from '../server/store/types.js';

const dirs: string[] = [];
afterEach(() => {
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});
function tempDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'ductbench-blocks-'));
  dirs.push(d);
  return d;
}

/** A small deterministic generator, so failures reproduce. */
function rng(seed: number): () => number {
  let s = seed >>> 0;
  return () => {
    s = (s * 1664525 + 1013904223) >>> 0;
    return s / 2 ** 32;
  };
}

/** A sample whose channels are null in a pattern that varies per channel; t as given. */
function sample(i: number, t: number): Sample {
  return {
    t,
    dt: i % 11 === 3 ? (null as unknown as number) : i * 0.002,
    thrust: i % 7 === 0 ? null : Math.sin(i / 9) * 3,
    voltage: 14.8 - i * 1e-5,
    current: i % 3 === 0 ? null : 2 + (i % 13) * 0.125,
    power: i % 2 === 0 ? null : 40 + i * 1e-3,
    rpm: i % 5 === 0 ? 7000 + i : null,
    temp: i % 50 === 0 ? 31.5 : null,
    torque: null,
    out: i % 4 === 1 ? 0 : 0.25 + (i % 100) / 400,
  };
}

function toRow(s: Sample): SampleRow {
  return [s.t, s.dt ?? null, ...SAMPLE_COLUMNS.map((c) => s[c] ?? null)];
}

describe('block codec', () => {
  it('round-trips samples with nulls at every size up to a full block', () => {
    for (const n of [0, 1, 2, 3, 17, 1000, 4095, MAX_BLOCK_ROWS]) {
      const samples = Array.from({ length: n }, (_, i) => sample(i, 1000 + i * 2));
      const b = packSamples(samples);
      expect(b.n).toBe(n);
      expect(b.data.byteLength).toBe(n * BLOCK_COLUMNS * 8);
      const f = unpackBlock(b.data, n);
      const rows = Array.from({ length: n }, (_, i) => blockRow(f, n, i));
      expect(rows).toEqual(samples.map(toRow));
      if (n > 0) {
        expect(b.t0).toBe(1000);
        expect(b.t1).toBe(1000 + (n - 1) * 2);
      }
    }
  });

  it('refuses more rows than a block holds, and a sample without a time', () => {
    const many = Array.from({ length: MAX_BLOCK_ROWS + 1 }, (_, i) => sample(i, i));
    expect(() => packSamples(many)).toThrow(RangeError);
    expect(packSamples(many, 1).n).toBe(MAX_BLOCK_ROWS);
    expect(() => packRows(many.map(toRow))).toThrow(RangeError);
    const bad = [sample(0, 1), { ...sample(1, 2), t: null as unknown as number }];
    expect(() => packSamples(bad)).toThrow(InvalidInput);
    expect(() => packSamples([{ ...sample(1, 2), t: NaN }])).toThrow(InvalidInput);
  });

  it('t0 and t1 are the smallest and largest time, wherever they sit in the block', () => {
    const b = packSamples([sample(0, 50), sample(1, 20), sample(2, 90), sample(3, 60)]);
    expect([b.t0, b.t1]).toEqual([20, 90]);
  });

  it('lays out column-major little-endian float64 with NaN for null', () => {
    const s = [sample(0, 1234.5), sample(1, 1236.25), sample(2, 1238)];
    const b = packSamples(s);
    // Reference: DataView reads IEEE 754 binary64 with the byte order asked for (ECMAScript GetViewValue).
    const view = new DataView(b.data.buffer, b.data.byteOffset, b.data.byteLength);
    const n = s.length;
    for (let c = 0; c < BLOCK_COLUMNS; c++) {
      for (let i = 0; i < n; i++) {
        const want = toRow(s[i])[c];
        const got = view.getFloat64((c * n + i) * 8, true);
        if (want === null) expect(Number.isNaN(got)).toBe(true);
        else expect(got).toBe(want);
      }
    }
    // Column 0 is t, column 1 dt, then the channels in schema order.
    expect(s[0].thrust).toBeNull();
    expect(Number.isNaN(view.getFloat64((2 * n + 0) * 8, true))).toBe(true);
    expect(view.getFloat64((3 * n + 1) * 8, true)).toBe(s[1].voltage);
  });

  it('rows and samples pack to the same bytes', () => {
    const s = Array.from({ length: 300 }, (_, i) => sample(i, 5000 + i));
    expect(Buffer.compare(Buffer.from(packSamples(s).data), Buffer.from(packRows(s.map(toRow)).data))).toBe(0);
  });

  it('a big-endian host swaps to the stored little-endian order and back', () => {
    const s = Array.from({ length: 257 }, (_, i) => sample(i, 7000 + i * 0.5));
    const native = Buffer.from(packSamples(s, 0, s.length, { bigEndian: false }).data);
    // On this (little-endian) machine the flag makes the packer swap what it wrote, as a big-endian host must:
    // every 8-byte word comes out reversed.
    const swapped = Buffer.from(packSamples(s, 0, s.length, { bigEndian: true }).data);
    expect(swapped.equals(native)).toBe(false);
    for (let w = 0; w < native.length; w += 8) {
      for (let k = 0; k < 8; k++) if (swapped[w + k] !== native[w + 7 - k]) throw new Error(`byte ${w + k} not swapped`);
    }
    const before = Buffer.from(swapped);
    const f = unpackBlock(swapped, s.length, true);
    expect(swapped.equals(before)).toBe(true);
    expect(Array.from({ length: s.length }, (_, i) => blockRow(f, s.length, i))).toEqual(s.map(toRow));
  });

  it('decodes a blob that does not start on an 8-byte boundary, and refuses a damaged one', () => {
    const s = Array.from({ length: 40 }, (_, i) => sample(i, i));
    const b = packSamples(s).data;
    const odd = Buffer.alloc(b.length + 3);
    b.copy(odd, 3);
    const view = odd.subarray(3);
    expect(view.byteOffset % 8).not.toBe(0);
    const f = unpackBlock(view, 40);
    expect(Array.from({ length: 40 }, (_, i) => blockRow(f, 40, i))).toEqual(s.map(toRow));
    expect(() => unpackBlock(b.subarray(0, b.length - 8), 40)).toThrow(/damaged/);
  });

  it('a scratch buffer is reused for the blob', () => {
    const scratch = new Float64Array(MAX_BLOCK_ROWS * BLOCK_COLUMNS);
    const b = packSamples([sample(0, 1), sample(1, 2)], 0, 2, { scratch });
    expect(b.data.buffer).toBe(scratch.buffer);
    expect(scratch[0]).toBe(1);
  });
});

// ------------------------------------------------------------------------------------------------ reading

const COLS = `t, dt, ${SAMPLE_COLUMNS.join(', ')}`;

/** The old one-row-per-sample layout in memory: the reference for every read. */
class Reference {
  readonly db = new Database(':memory:');
  private readonly ins;
  constructor() {
    this.db.exec(`CREATE TABLE samples (t REAL NOT NULL, dt REAL, ${SAMPLE_COLUMNS.map((c) => `${c} REAL`).join(', ')}); CREATE INDEX samples_t ON samples (t);`);
    this.ins = this.db.prepare(`INSERT INTO samples (${COLS}) VALUES (${[...COLS.split(',')].map(() => '?').join(', ')})`);
  }
  add(samples: readonly Sample[]): void {
    this.db.transaction(() => {
      for (const s of samples) this.ins.run(...toRow(s));
    })();
  }
  rows(from = -Infinity, to = Infinity): SampleRow[] {
    return this.db.prepare(`SELECT ${COLS} FROM samples WHERE t >= ? AND t < ? ORDER BY t, rowid`).raw().all(from, to) as SampleRow[];
  }
  decimated(d: Decimation, from = -Infinity, to = Infinity): SampleRow[] {
    const r = this.db.prepare('SELECT count(*) AS n, min(t) AS t0, max(t) AS t1 FROM samples WHERE t >= ? AND t < ?').get(from, to) as { n: number; t0: number; t1: number };
    let dec: Decimator = keepAll();
    if (r.n > d.points) {
      dec = d.method === 'stride' ? strideDecimator(r.n, d.points) : minmaxDecimator(r.t0, r.t1, d.points, SAMPLE_COLUMNS.indexOf(d.channel ?? 'thrust') + 2);
    }
    for (const row of this.rows(from, to)) dec.push(row);
    return dec.finish();
  }
  max(): number {
    return this.db.prepare('SELECT max(t) FROM samples').pluck().get() as number;
  }
}

/**
 * Batches of many sizes (1, a few, a full block, a block and one, ...), so block edges fall everywhere; repeated
 * times across edges; a host clock stepped back (a later batch overlapping earlier blocks in time); and a batch
 * whose times go backwards inside it.
 */
function scenario(): Sample[][] {
  const batches: Sample[][] = [];
  let i = 0;
  let t = 1_700_000_000_000;
  const batch = (n: number, step: (k: number) => number) => {
    const b: Sample[] = [];
    for (let k = 0; k < n; k++) {
      b.push(sample(i++, t));
      t += step(k);
    }
    batches.push(b);
  };
  batch(1, () => 2);
  batch(50, () => 2);
  batch(4096, (k) => (k % 100 === 99 ? 0 : 2)); // some equal times inside
  batch(4097, () => 2); // two blocks
  t -= 2; // the next batch starts at the time the last one ended: a tie across a block edge
  batch(3, () => 0);
  batch(9000, () => 1);
  t -= 30_000; // clock stepped back into the middle of earlier blocks
  batch(5000, () => 3);
  // Times going back and forth inside one batch.
  const r = rng(7);
  const wobbly: Sample[] = [];
  for (let k = 0; k < 2000; k++) wobbly.push(sample(i++, t + Math.floor(r() * 4000)));
  batches.push(wobbly);
  t += 4000;
  batch(7, () => 2);
  return batches;
}

describe('reading samples stored in blocks', () => {
  it('gives the rows, windows and decimations of the one-row-per-sample layout', () => {
    const store = SessionStore.open(tempDir());
    const ref = new Reference();
    const id = store.createSession({ title: 'block edges' }, 'completed');
    const other = store.createSession({ title: 'neighbour' }, 'completed');
    for (const b of scenario()) {
      store.writeBatch(id, b);
      ref.add(b);
      // Another session's blocks interleaved in the table must never leak in.
      store.writeBatch(other, [sample(0, b[0].t)]);
    }
    const all = ref.rows();
    expect(store.summary(id).sample_count).toBe(all.length);
    // A batch above a block's size became more than one block, none larger than a block.
    const ns = store.db.prepare('SELECT n FROM sample_blocks WHERE session_id = ? ORDER BY rowid').pluck().all(id) as number[];
    expect(Math.max(...ns)).toBe(MAX_BLOCK_ROWS);
    expect(ns.slice(2, 5)).toEqual([4096, 4096, 1]);

    expect(store.sampleRows(id)).toEqual(all);
    expect([...store.iterateSamples(id)]).toEqual(all);

    // Windows: edges on stored times (block boundaries among them), between them, empty, reversed, outside.
    const ts = all.map((r) => r[0] as number);
    const bounds = store.db.prepare('SELECT t0, t1 FROM sample_blocks WHERE session_id = ?').raw().all(id).flat() as number[];
    const r = rng(11);
    const pick = () => {
      const k = r();
      if (k < 0.4) return bounds[Math.floor(r() * bounds.length)];
      if (k < 0.8) return ts[Math.floor(r() * ts.length)];
      return ts[0] - 10 + r() * (ts[ts.length - 1] - ts[0] + 20);
    };
    const windows: [number, number][] = [
      [-Infinity, Infinity],
      [ts[0], ts[ts.length - 1]],
      [ts[ts.length - 1], Infinity],
      [-Infinity, ts[0]],
      [5, 10],
      [ts[100], ts[50]],
    ];
    for (let k = 0; k < 60; k++) {
      const a = pick();
      const b = pick();
      windows.push(a <= b ? [a, b] : [b, a]);
    }
    for (const [from, to] of windows) {
      expect(store.sampleRows(id, { from, to }), `window ${from}..${to}`).toEqual(ref.rows(from, to));
    }
    const decimations: Decimation[] = [
      { method: 'stride', points: 100 },
      { method: 'stride', points: 2 },
      { method: 'minmax', points: 500 },
      { method: 'minmax', points: 64, channel: 'rpm' },
      { method: 'minmax', points: 30, channel: 'torque' },
      { method: 'minmax', points: 1_000_000, channel: 'current' },
    ];
    for (const d of decimations) {
      for (const [from, to] of windows.slice(0, 20)) {
        expect(store.sampleRows(id, { from, to, decimate: d }), `${JSON.stringify(d)} ${from}..${to}`).toEqual(ref.decimated(d, from, to));
      }
    }
    // The columns API says the same.
    const batch = store.samples(id, { from: ts[5000], to: ts[20000] });
    const want = ref.rows(ts[5000], ts[20000]);
    expect(batch.t).toEqual(want.map((x) => x[0]));
    expect(batch.dt).toEqual(want.map((x) => (x[1] === null ? NaN : x[1])));
    expect(batch.rpm).toEqual(want.map((x) => x[2 + SAMPLE_COLUMNS.indexOf('rpm')]));
    store.close();
  });

  it('an interrupted session ends at its latest sample even when the clock stepped back in the last block', () => {
    const dir = tempDir();
    const store = SessionStore.open(dir);
    const rec = store.record({ title: 'stepped clock' });
    for (let i = 0; i < 300; i++) rec.addSample(sample(i, 10_000 + i));
    rec.flush();
    for (let i = 0; i < 20; i++) rec.addSample(sample(300 + i, 9_000 + i));
    rec.flush();
    store.db.prepare('UPDATE sessions SET recorder_pid = ? WHERE id = ?').run(2 ** 22 + 54321, rec.id);
    const other = SessionStore.open(dir);
    expect(other.get(rec.id).ended_at).toBe(10_299);
    other.close();
    store.close();
  });

  it('a stopped stream releases the database', () => {
    const store = SessionStore.open(tempDir());
    const id = store.createSession({}, 'completed');
    for (let k = 0; k < 4; k++) store.writeBatch(id, Array.from({ length: 3000 }, (_, i) => sample(i, k * 3000 + i)));
    let seen = 0;
    for (const row of store.iterateSamples(id)) {
      expect(row[0]).toBe(seen);
      if (++seen === 5000) break;
    }
    // An open cursor would make better-sqlite3 refuse this write ("connection is busy").
    store.writeBatch(id, [sample(0, 99_999)]);
    expect(store.summary(id).sample_count).toBe(12_001);
    store.close();
  });

  it('imports through exchange still read back exactly', async () => {
    const { importText, writeJson, exportToString } = await import('../server/store/exchange.js');
    const store = SessionStore.open(tempDir());
    const id = store.createSession({ title: 'source' }, 'completed');
    const rows: Sample[] = Array.from({ length: 12_345 }, (_, i) => sample(i, 1_000_000 + i * 2));
    store.writeBatch(id, rows);
    const json = exportToString((w) => writeJson(store, id, w));
    const back = importText(store, json, {});
    expect(store.sampleRows(back.id)).toEqual(store.sampleRows(id));
    expect(store.summary(back.id).sample_count).toBe(12_345);
    store.close();
  });
});
