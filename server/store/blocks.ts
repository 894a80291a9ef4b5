// Samples are stored in blocks, not one SQLite row each. A row per sample cost about 1.6 us to insert (binding
// eleven values, a B-tree insert and an index update per sample), the largest single cost of the daemon's
// ingest pipeline at several hundred thousand lines a second. A block is one row holding up to 4096 samples as
// one blob, so SQLite does that work once per block and the per-sample cost is copying ten numbers into a
// typed array.
//
// Blob layout (schema version 3): n rows of the ten columns t, dt, then SAMPLE_COLUMNS in order, as float64,
// column-major (all n t values, then all n dt values, ...), little-endian whatever the host, NaN for NULL.
// NaN is free to mean NULL because no stored sample carries NaN (the decoder rejects non-finite numbers, and
// SQLite itself stored a NaN as NULL in the old row layout). Changing this layout needs a new migration.
//
// The second half reads blocks back as rows in exactly the order the old `ORDER BY t, rowid` gave: blocks come
// in (t0, rowid) order, each block's rows in its window are stably sorted by t (a linear check when they are
// already sorted, as a recorder's are), and blocks whose time spans overlap (a host clock stepped back) are
// merged by (t, block rowid, position), which is the old (t, rowid) order because rowids grow with insertion.

import { endianness } from 'node:os';
import type { Sample } from '../bench/telemetry.js';
import type { SampleRow } from './decimate.js';
import { InvalidInput } from './errors.js';
// Type-only, so there is no runtime import cycle with schema.ts (whose migration uses this module).
import type { SAMPLE_COLUMNS } from './schema.js';

/** Columns in a block: t, dt, then the sample channels. The type fails to compile if SAMPLE_COLUMNS changes length. */
export const BLOCK_COLUMNS: ['t', 'dt', ...typeof SAMPLE_COLUMNS]['length'] = 10;
/** Most rows in one block: a full recorder batch (recorder DEFAULT_MAX_BATCH) is one block. */
export const MAX_BLOCK_ROWS = 4096;
const BYTES_PER_ROW = BLOCK_COLUMNS * 8;

export const HOST_BIG_ENDIAN = endianness() === 'BE';

export interface PackedBlock {
  /** Smallest and largest t in the block. */
  t0: number;
  t1: number;
  n: number;
  /** The blob. It may alias `scratch` (see packSamples): bind or copy it before packing again. */
  data: Buffer;
}

export interface PackOptions {
  /** Write as a big-endian host would (tests exercise the byte swap on a little-endian machine). */
  bigEndian?: boolean;
  /** Reused storage for the blob, at least MAX_BLOCK_ROWS * BLOCK_COLUMNS long, to spare an allocation per block. */
  scratch?: Float64Array;
}

function storage(n: number, opts: PackOptions): Float64Array {
  const need = n * BLOCK_COLUMNS;
  return opts.scratch && opts.scratch.length >= need ? opts.scratch : new Float64Array(need);
}

function finish(f: Float64Array, n: number, t0: number, t1: number, opts: PackOptions): PackedBlock {
  const data = Buffer.from(f.buffer, f.byteOffset, n * BYTES_PER_ROW);
  if (opts.bigEndian ?? HOST_BIG_ENDIAN) data.swap64();
  return { t0, t1, n, data };
}

function badTime(at: number): never {
  throw new InvalidInput(`sample ${at}: t must be a number (ms)`);
}

/** Packs samples[start..end) (at most MAX_BLOCK_ROWS of them) into one block. */
export function packSamples(samples: readonly Sample[], start = 0, end = samples.length, opts: PackOptions = {}): PackedBlock {
  const n = end - start;
  if (!(n >= 0 && n <= MAX_BLOCK_ROWS)) throw new RangeError(`a block holds 0..${MAX_BLOCK_ROWS} rows, not ${n}`);
  const f = storage(n, opts);
  let t0 = Infinity;
  let t1 = -Infinity;
  // Fields one by one, not a loop over names: a keyed load per field would cost more than all the rest.
  for (let i = 0; i < n; i++) {
    const s = samples[start + i];
    const t = s.t;
    if (typeof t !== 'number' || t !== t) badTime(start + i);
    if (t < t0) t0 = t;
    if (t > t1) t1 = t;
    f[i] = t;
    f[n + i] = s.dt ?? NaN;
    f[2 * n + i] = s.thrust ?? NaN;
    f[3 * n + i] = s.voltage ?? NaN;
    f[4 * n + i] = s.current ?? NaN;
    f[5 * n + i] = s.power ?? NaN;
    f[6 * n + i] = s.rpm ?? NaN;
    f[7 * n + i] = s.temp ?? NaN;
    f[8 * n + i] = s.torque ?? NaN;
    f[9 * n + i] = s.out ?? NaN;
  }
  return finish(f, n, t0, t1, opts);
}

/** Packs rows (t, dt, then the channels; null for absent) into one block: the migration's path from the old table. */
export function packRows(rows: readonly SampleRow[], opts: PackOptions = {}): PackedBlock {
  const n = rows.length;
  if (n > MAX_BLOCK_ROWS) throw new RangeError(`a block holds 0..${MAX_BLOCK_ROWS} rows, not ${n}`);
  const f = storage(n, opts);
  let t0 = Infinity;
  let t1 = -Infinity;
  for (let i = 0; i < n; i++) {
    const r = rows[i];
    const t = r[0];
    if (typeof t !== 'number' || t !== t) badTime(i);
    if (t < t0) t0 = t;
    if (t > t1) t1 = t;
    for (let c = 0; c < BLOCK_COLUMNS; c++) f[c * n + i] = r[c] ?? NaN;
  }
  return finish(f, n, t0, t1, opts);
}

/**
 * The columns of a stored block: column c of row i is at c * n + i, NaN for NULL. A view of `data` when the host
 * is little-endian and the buffer is 8-byte aligned (better-sqlite3 hands out fresh buffers, so usually), else a
 * copy; `data` itself is never modified.
 */
export function unpackBlock(data: Uint8Array, n: number, bigEndian: boolean = HOST_BIG_ENDIAN): Float64Array {
  if (data.byteLength !== n * BYTES_PER_ROW) {
    throw new Error(`damaged sample block: ${data.byteLength} bytes for ${n} rows (expected ${n * BYTES_PER_ROW})`);
  }
  if (!bigEndian && data.byteOffset % 8 === 0) return new Float64Array(data.buffer, data.byteOffset, n * BLOCK_COLUMNS);
  const f = new Float64Array(n * BLOCK_COLUMNS);
  const bytes = Buffer.from(f.buffer);
  bytes.set(data);
  if (bigEndian) bytes.swap64();
  return f;
}

const v = (x: number): number | null => (x === x ? x : null);

/** Row i of unpacked columns, NaN turned back into null. */
export function blockRow(f: Float64Array, n: number, i: number): SampleRow {
  return [f[i], v(f[n + i]), v(f[2 * n + i]), v(f[3 * n + i]), v(f[4 * n + i]), v(f[5 * n + i]), v(f[6 * n + i]), v(f[7 * n + i]), v(f[8 * n + i]), v(f[9 * n + i])];
}

// ------------------------------------------------------------------------------------------------ reading

/** A stored block's index entry; `id` is its rowid. */
export interface BlockEntry {
  id: number;
  t0: number;
  n: number;
}

/** One block's rows inside the window, in stable t order, being handed out. */
interface Run {
  id: number;
  f: Float64Array;
  n: number;
  /** Row indices in output order, or null for 0..n-1. */
  order: Int32Array | null;
  len: number;
  pos: number;
}

function rowAt(r: Run, pos: number): number {
  return r.order === null ? pos : r.order[pos];
}

function tAt(r: Run): number {
  return r.f[rowAt(r, r.pos)];
}

/** Orders runs by their next row: (t, block rowid). Two runs never share a rowid, so this is strict. */
function less(a: Run, b: Run): boolean {
  const ta = tAt(a);
  const tb = tAt(b);
  return ta < tb || (ta === tb && a.id < b.id);
}

function openRun(b: BlockEntry, data: Uint8Array, from: number, to: number, bigEndian: boolean): Run | null {
  const n = b.n;
  const f = unpackBlock(data, n, bigEndian);
  let kept = 0;
  let sorted = true;
  let prev = -Infinity;
  for (let i = 0; i < n; i++) {
    const t = f[i];
    if (t >= from && t < to) {
      kept++;
      if (t < prev) sorted = false;
      prev = t;
    }
  }
  if (kept === 0) return null;
  let order: Int32Array | null = null;
  if (kept !== n || !sorted) {
    order = new Int32Array(kept);
    let k = 0;
    for (let i = 0; i < n; i++) {
      const t = f[i];
      if (t >= from && t < to) order[k++] = i;
    }
    // The index breaks ties, so the sort is stable whatever the engine's sort guarantees.
    if (!sorted) order.sort((a, c) => f[a] - f[c] || a - c);
  }
  return { id: b.id, f, n, order, len: kept, pos: 0 };
}

class RunHeap {
  readonly a: Run[] = [];
  get size(): number {
    return this.a.length;
  }
  push(r: Run): void {
    const a = this.a;
    a.push(r);
    let i = a.length - 1;
    while (i > 0) {
      const p = (i - 1) >> 1;
      if (!less(a[i], a[p])) break;
      [a[i], a[p]] = [a[p], a[i]];
      i = p;
    }
  }
  /** Restores order after the top run advanced or was emptied (then it is removed). */
  fixTop(): void {
    const a = this.a;
    if (a[0].pos >= a[0].len) {
      const last = a.pop() as Run;
      if (a.length === 0) return;
      a[0] = last;
    }
    let i = 0;
    for (;;) {
      const l = 2 * i + 1;
      const r = l + 1;
      let m = i;
      if (l < a.length && less(a[l], a[m])) m = l;
      if (r < a.length && less(a[r], a[m])) m = r;
      if (m === i) return;
      [a[i], a[m]] = [a[m], a[i]];
      i = m;
    }
  }
  /** The run whose next row is second in line (a child of the top), or null. */
  second(): Run | null {
    const a = this.a;
    if (a.length < 2) return null;
    if (a.length < 3) return a[1];
    return less(a[1], a[2]) ? a[1] : a[2];
  }
}

/**
 * Rows with from <= t < to from blocks given in (t0, rowid) order, in (t, rowid) order, in chunks of at most one
 * block's worth so that a long session streams through bounded memory. `load` fetches a block's blob when the
 * merge reaches it, so only blocks that overlap in time are held at once.
 */
export function* orderedRows(
  blocks: Iterable<BlockEntry>,
  load: (b: BlockEntry) => Uint8Array,
  from: number,
  to: number,
  bigEndian: boolean = HOST_BIG_ENDIAN,
): Generator<SampleRow[]> {
  const it = blocks[Symbol.iterator]();
  let next = it.next();
  const heap = new RunHeap();
  try {
    for (;;) {
      // Open every block that may hold the next row: no unopened block has a row before its own (t0, rowid).
      while (!next.done && (heap.size === 0 || next.value.t0 < tAt(heap.a[0]) || (next.value.t0 === tAt(heap.a[0]) && next.value.id < heap.a[0].id))) {
        const run = openRun(next.value, load(next.value), from, to, bigEndian);
        if (run) heap.push(run);
        next = it.next();
      }
      if (heap.size === 0) return;
      // Hand out the top run's rows up to the first that another run or an unopened block must precede.
      const top = heap.a[0];
      const other = heap.second();
      let bt = Infinity;
      let bid = Infinity;
      if (other) {
        bt = tAt(other);
        bid = other.id;
      }
      if (!next.done && (next.value.t0 < bt || (next.value.t0 === bt && next.value.id < bid))) {
        bt = next.value.t0;
        bid = next.value.id;
      }
      const out: SampleRow[] = [];
      const { f, n } = top;
      while (top.pos < top.len) {
        const i = rowAt(top, top.pos);
        const t = f[i];
        if (t > bt || (t === bt && top.id > bid)) break;
        out.push(blockRow(f, n, i));
        top.pos++;
      }
      // The top run always precedes every bound, so at least one row goes out; never spin on a broken order.
      if (out.length === 0) throw new Error('sample blocks: the merge made no progress (inconsistent order)');
      heap.fixTop();
      yield out;
    }
  } finally {
    it.return?.();
  }
}

/** How many rows of a block fall in [from, to), and their smallest and largest t. */
export function blockRange(data: Uint8Array, n: number, from: number, to: number, bigEndian: boolean = HOST_BIG_ENDIAN): { n: number; t0: number; t1: number } {
  const f = unpackBlock(data, n, bigEndian);
  let k = 0;
  let t0 = Infinity;
  let t1 = -Infinity;
  for (let i = 0; i < n; i++) {
    const t = f[i];
    if (t >= from && t < to) {
      k++;
      if (t < t0) t0 = t;
      if (t > t1) t1 = t;
    }
  }
  return { n: k, t0, t1 };
}
