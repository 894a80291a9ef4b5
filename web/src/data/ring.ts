// Columnar ring buffer of the recent samples. Fixed capacity, typed arrays, NaN where the daemon sent null:
// memory stays flat however long the dashboard stays open, and charts read columns without copying.
// Pure module (no DOM), tested in test/web-data.test.ts.

import { SAMPLE_CHANNELS, type SampleBatch, type SampleChannel } from '../../../server/api/messages.js';

/** Ten minutes at 1 kHz: about 29 MB (t and dt as float64, eight channels as float32). */
export const DEFAULT_RING_CAPACITY = 600_000;

/** Where the ring's logical sample 0 sits in its arrays; logical i lives at (start + i) % capacity. */
export interface RingWindow {
  readonly start: number;
  readonly length: number;
  readonly capacity: number;
}

export class SampleRing implements RingWindow {
  readonly capacity: number;
  /** Host time, ms since the Unix epoch, never decreasing (see append). */
  readonly t: Float64Array;
  /** Device clock, seconds. */
  readonly dt: Float64Array;
  /** float32 is plenty for sensor values (7 significant digits) and halves the memory. */
  readonly ch: Readonly<Record<SampleChannel, Float32Array>>;
  /** Last finite value per channel and the host time it came with; readouts show these. */
  readonly latest: Record<SampleChannel, number>;
  readonly latestT: Record<SampleChannel, number>;

  private _start = 0;
  private _length = 0;
  /** Increments on every change, so a chart can tell whether it needs to redraw. */
  private _version = 0;
  /** Samples ever appended since the last clear (counts those overwritten too). */
  private _appended = 0;
  private _generation = 0;

  constructor(capacity = DEFAULT_RING_CAPACITY) {
    if (!Number.isSafeInteger(capacity) || capacity < 2) throw new RangeError(`ring capacity ${capacity} must be an integer >= 2`);
    this.capacity = capacity;
    this.t = new Float64Array(capacity);
    this.dt = new Float64Array(capacity);
    const ch = {} as Record<SampleChannel, Float32Array>;
    for (const c of SAMPLE_CHANNELS) ch[c] = new Float32Array(capacity);
    this.ch = ch;
    this.latest = nanRecord();
    this.latestT = nanRecord();
  }

  get start(): number {
    return this._start;
  }
  get length(): number {
    return this._length;
  }
  get version(): number {
    return this._version;
  }
  get appended(): number {
    return this._appended;
  }
  /** Counts clears: what was computed from the ring before a clear is void after it. */
  get generation(): number {
    return this._generation;
  }

  clear(): void {
    this._start = 0;
    this._length = 0;
    this._appended = 0;
    this._generation++;
    for (const c of SAMPLE_CHANNELS) {
      this.latest[c] = NaN;
      this.latestT[c] = NaN;
    }
    this._version++;
  }

  /** Physical index of logical sample i (0 = oldest kept). */
  at(i: number): number {
    const p = this._start + i;
    return p >= this.capacity ? p - this.capacity : p;
  }

  /** Host time of the newest sample, or NaN when empty. */
  lastT(): number {
    return this._length === 0 ? NaN : this.t[this.at(this._length - 1)];
  }

  firstT(): number {
    return this._length === 0 ? NaN : this.t[this._start];
  }

  /**
   * Appends a columnar batch and returns how many samples it held. Rows without a finite host time are
   * skipped. A host time earlier than the newest kept is raised to it: the binary search in lowerBound needs
   * a sorted column, and a clock step on the host must not scramble the plots.
   */
  append(batch: SampleBatch): number {
    const ts = Array.isArray(batch?.t) ? batch.t : [];
    const n = ts.length;
    let last = this._length === 0 ? -Infinity : this.lastT();
    let added = 0;
    for (let r = 0; r < n; r++) {
      let tr = ts[r];
      if (typeof tr !== 'number' || !Number.isFinite(tr)) continue;
      if (tr < last) tr = last;
      last = tr;
      let p: number;
      if (this._length < this.capacity) {
        p = this.at(this._length);
        this._length++;
      } else {
        // Full: overwrite the oldest.
        p = this._start;
        this._start = this._start + 1 === this.capacity ? 0 : this._start + 1;
      }
      this.t[p] = tr;
      this.dt[p] = num(batch.dt, r);
      for (const c of SAMPLE_CHANNELS) {
        const v = num(batch[c], r);
        this.ch[c][p] = v;
        if (v === v) {
          this.latest[c] = v;
          this.latestT[c] = tr;
        }
      }
      added++;
    }
    if (added > 0) {
      this._appended += added;
      this._version++;
    }
    return added;
  }

  /** Logical index of the first sample with t >= tMs (length when none). */
  lowerBound(tMs: number): number {
    let lo = 0;
    let hi = this._length;
    while (lo < hi) {
      const mid = (lo + hi) >>> 1;
      if (this.t[this.at(mid)] < tMs) lo = mid + 1;
      else hi = mid;
    }
    return lo;
  }

  /** Copies one column in logical order (for tests and small exports; charts read in place). */
  column(name: 't' | 'dt' | SampleChannel): number[] {
    const src = name === 't' ? this.t : name === 'dt' ? this.dt : this.ch[name];
    const out = new Array<number>(this._length);
    for (let i = 0; i < this._length; i++) out[i] = src[this.at(i)];
    return out;
  }
}

function num(col: ReadonlyArray<number | null> | undefined, r: number): number {
  if (!Array.isArray(col)) return NaN;
  const v = col[r];
  return typeof v === 'number' && Number.isFinite(v) ? v : NaN;
}

function nanRecord(): Record<SampleChannel, number> {
  const r = {} as Record<SampleChannel, number>;
  for (const c of SAMPLE_CHANNELS) r[c] = NaN;
  return r;
}
