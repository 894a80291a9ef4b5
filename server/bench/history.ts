// Fixed-capacity columnar ring of recent samples, for the snapshot a dashboard gets when it (re)connects.
// Float64Array columns with NaN for "not sampled": memory is fixed however long the daemon runs.

import { emptyBatch, type SampleBatch, type SampleChannel } from '../api/messages.js';
import { SAMPLE_KEYS, type Sample } from './telemetry.js';

/** A block of rows in columns (NaN for "not sampled"): what crosses from the bench's thread to the web side's. */
export type Columns = Record<'t' | 'dt' | SampleChannel, Float64Array>;
export const COLUMN_KEYS = ['t', 'dt', ...SAMPLE_KEYS] as const;

function columns(n: number): Columns {
  const mk = () => new Float64Array(n);
  return { t: mk(), dt: mk(), thrust: mk(), voltage: mk(), current: mk(), power: mk(), rpm: mk(), temp: mk(), torque: mk(), out: mk() };
}

/** Writes sample s as row i, NaN for "not sampled". */
function writeRow(c: Columns, i: number, s: Sample): void {
  // Written out per channel rather than looped over SAMPLE_KEYS: this runs for every line at telemetry rates.
  c.t[i] = s.t;
  c.dt[i] = s.dt;
  c.thrust[i] = s.thrust ?? NaN;
  c.voltage[i] = s.voltage ?? NaN;
  c.current[i] = s.current ?? NaN;
  c.power[i] = s.power ?? NaN;
  c.rpm[i] = s.rpm ?? NaN;
  c.temp[i] = s.temp ?? NaN;
  c.torque[i] = s.torque ?? NaN;
  c.out[i] = s.out ?? NaN;
}

export class SampleRing {
  private readonly cols: Columns;
  private head = 0;
  private count = 0;

  constructor(readonly capacity: number) {
    this.cols = columns(capacity);
  }

  get size(): number {
    return this.count;
  }

  push(s: Sample): void {
    const i = this.head;
    writeRow(this.cols, i, s);
    this.head = i + 1 === this.capacity ? 0 : i + 1;
    if (this.count < this.capacity) this.count++;
  }

  /** Rows 0..n-1 of a block, oldest first. */
  pushColumns(c: Columns, n: number): void {
    // A block larger than the ring leaves only its newest rows.
    const from = Math.max(0, n - this.capacity);
    for (let j = from; j < n; ) {
      const i = this.head;
      const run = Math.min(n - j, this.capacity - i);
      for (const k of COLUMN_KEYS) this.cols[k].set(c[k].subarray(j, j + run), i);
      j += run;
      this.head = i + run === this.capacity ? 0 : i + run;
      this.count = Math.min(this.capacity, this.count + run);
    }
  }

  /**
   * Samples with host time >= sinceMs, oldest first, thinned to at most maxPoints by keeping every k-th.
   * Thinning by stride (not averaging) keeps every returned row a real sample.
   */
  toBatch(sinceMs: number, maxPoints: number): SampleBatch {
    const out = emptyBatch();
    const start = (this.head - this.count + this.capacity) % this.capacity;
    let first = 0;
    // find the first index (in age order) at or after sinceMs
    let lo = 0;
    let hi = this.count;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (this.cols.t[(start + mid) % this.capacity] < sinceMs) lo = mid + 1;
      else hi = mid;
    }
    first = lo;
    const n = this.count - first;
    const stride = Math.max(1, Math.ceil(n / Math.max(1, maxPoints)));
    for (let j = first; j < this.count; j += stride) {
      const i = (start + j) % this.capacity;
      out.t.push(this.cols.t[i]);
      out.dt.push(this.cols.dt[i]);
      for (const k of SAMPLE_KEYS) {
        const v = this.cols[k][i];
        out[k].push(Number.isNaN(v) ? null : v);
      }
    }
    return out;
  }
}

/**
 * The rows gathered between two broadcasts, in growable Float64Array columns (NaN for "not sampled"). A batch
 * built from plain arrays of number|null boxes every value it holds; at tens of thousands of rows a second
 * that garbage was a measurable share of the ingest profile. take() thins and converts once per broadcast.
 */
export class LiveBatch {
  private cols: Columns;
  private n = 0;

  constructor(private capacity = 1024) {
    this.cols = columns(capacity);
  }

  get size(): number {
    return this.n;
  }

  add(s: Sample): void {
    if (this.n === this.capacity) this.grow();
    writeRow(this.cols, this.n++, s);
  }

  /** Rows 0..n-1 of a block. */
  addColumns(c: Columns, n: number): void {
    while (this.n + n > this.capacity) this.grow();
    for (const k of COLUMN_KEYS) this.cols[k].set(c[k].subarray(0, n), this.n);
    this.n += n;
  }

  /** The rows so far as columns of their own (copies, to be transferred), and an empty batch for what follows. */
  drain(): { cols: Columns; n: number } {
    const n = this.n;
    const out = {} as Columns;
    for (const k of COLUMN_KEYS) out[k] = this.cols[k].slice(0, n);
    this.n = 0;
    return { cols: out, n };
  }

  /**
   * The rows so far as a broadcast batch of at most maxRows rows (see thinBatch for how rows are merged), and
   * an empty batch for what follows.
   */
  take(maxRows: number): SampleBatch {
    const n = this.n;
    const rows = Math.min(n, Math.max(1, maxRows));
    const out = emptyBatch();
    const c = this.cols;
    for (let k = 0; k < rows && n > 0; k++) {
      const lo = Math.floor((k * n) / rows);
      const hi = Math.floor(((k + 1) * n) / rows); // exclusive
      out.t.push(c.t[hi - 1]);
      out.dt.push(c.dt[hi - 1]);
      for (const key of SAMPLE_KEYS) {
        const col = c[key];
        let v: number | null = null;
        for (let i = hi - 1; i >= lo; i--) {
          if (col[i] === col[i]) {
            v = col[i];
            break;
          }
        }
        out[key].push(v);
      }
    }
    this.n = 0;
    return out;
  }

  private grow(): void {
    const bigger = columns(this.capacity * 2);
    for (const k of Object.keys(bigger) as (keyof typeof bigger)[]) bigger[k].set(this.cols[k]);
    this.cols = bigger;
    this.capacity *= 2;
  }
}

/** Appends a sample to a columnar batch being built for broadcast. */
export function appendToBatch(b: SampleBatch, s: Sample): void {
  b.t.push(s.t);
  b.dt.push(s.dt);
  for (const k of SAMPLE_KEYS) b[k].push(s[k]);
}

/**
 * Thins a broadcast batch to at most maxRows rows for the live view. Rows are grouped into maxRows buckets; each
 * bucket becomes one row holding, per channel, the last value sampled in it. Unlike keeping every k-th row,
 * this never loses a slow channel (thrust at 80 Hz between 20 kHz electrical rows). The store keeps every row;
 * this is only what eyes on a chart need.
 */
export function thinBatch(b: SampleBatch, maxRows: number): SampleBatch {
  const n = b.t.length;
  if (n <= maxRows) return b;
  const out = emptyBatch();
  for (let k = 0; k < maxRows; k++) {
    const lo = Math.floor((k * n) / maxRows);
    const hi = Math.floor(((k + 1) * n) / maxRows); // exclusive
    out.t.push(b.t[hi - 1]);
    out.dt.push(b.dt[hi - 1]);
    for (const key of SAMPLE_KEYS) {
      const col = b[key];
      let v: number | null = null;
      for (let i = hi - 1; i >= lo; i--) {
        if (col[i] !== null) {
          v = col[i];
          break;
        }
      }
      out[key].push(v);
    }
  }
  return out;
}
