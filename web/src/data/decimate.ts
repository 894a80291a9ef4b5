// Reduces what the charts draw to what the screen can show: at most two points per pixel column for time
// plots (the minimum and the maximum, in time order, so spikes survive), one point per pixel cell for
// scatter plots. Pure functions over columns held in a ring (see ring.ts); tested in test/web-data.test.ts.

import type { RingWindow } from './ring.js';
import { GRAM_FORCE_N } from './units.js';

export interface Decimated {
  x: number[];
  /** null breaks the line: a real gap in the data, not a channel sampled at a lower rate. */
  y: (number | null)[];
}

export interface DecimateOptions {
  /** Logical index range [i0, i1) of the ring to read. */
  i0: number;
  i1: number;
  /** The x range shown; buckets of width (xTo - xFrom) / buckets, aligned to multiples of that width. */
  xFrom: number;
  xTo: number;
  /** Usually the plot width in CSS pixels. */
  buckets: number;
  /**
   * Two finite samples further apart than this (in x units) get a null between them, so a link drop shows
   * as a gap. NaN samples themselves are skipped: a channel sampled at a lower rate than the frame rate is
   * NaN at most rows and must still draw as a line.
   */
  gapX: number;
  /** Multiplies every y (unit conversion); applied after min/max, which a positive factor preserves. */
  scale?: number;
}

/** A plain array seen as a ring window (for tests and non-ring callers). */
export function linearWindow(length: number): RingWindow {
  return { start: 0, length, capacity: Math.max(length, 1) };
}

/**
 * Bucket width for a window. Buckets sit at whole multiples of it (not at the window's left edge), so they
 * stay put while the window slides and a finished bucket never has to be computed again (LiveDecimator).
 */
export function bucketWidth(xFrom: number, xTo: number, buckets: number): number {
  const bw = (xTo - xFrom) / Math.max(1, Math.floor(buckets));
  return bw > 0 && Number.isFinite(bw) ? bw : Infinity;
}

/** Collects min/max per bucket from samples pushed in x order. */
class MinMaxAccumulator {
  readonly x: number[] = [];
  readonly y: (number | null)[] = [];
  /** Bucket of each output point, for trimming the front. */
  readonly k: number[] = [];
  private _k = NaN;
  private _n = 0;
  private _minV = 0;
  private _maxV = 0;
  private _minX = 0;
  private _maxX = 0;
  private _minI = 0;
  private _maxI = 0;
  private _lastX = NaN;

  constructor(
    readonly bw: number,
    readonly gapX: number,
    readonly scale: number,
  ) {}

  push(xv: number, v: number, i: number): void {
    const k = Math.floor(xv / this.bw);
    if (xv - this._lastX > this.gapX) {
      this.flush();
      this.x.push((this._lastX + xv) / 2);
      this.y.push(null);
      this.k.push(k);
    }
    this._lastX = xv;
    if (k !== this._k) {
      this.flush();
      this._k = k;
    }
    if (this._n === 0) {
      this._minV = this._maxV = v;
      this._minX = this._maxX = xv;
      this._minI = this._maxI = i;
    } else if (v < this._minV) {
      this._minV = v;
      this._minX = xv;
      this._minI = i;
    } else if (v > this._maxV) {
      this._maxV = v;
      this._maxX = xv;
      this._maxI = i;
    }
    this._n++;
  }

  flush(): void {
    if (this._n === 0) return;
    this._emit(this.x, this.y, this.k);
    this._n = 0;
  }

  /** Everything so far including the open (newest) bucket, which stays open for more samples. */
  result(): Decimated {
    const x = this.x.slice();
    const y = this.y.slice();
    if (this._n > 0) this._emit(x, y, null);
    return { x, y };
  }

  /** Drops output points of buckets before kKeep, and a gap marker left leading. */
  trimBefore(kKeep: number): void {
    // An open bucket that slid out can get no more samples (time only grows): close it so it is trimmed too.
    if (this._n > 0 && this._k < kKeep) this.flush();
    let n = 0;
    while (n < this.k.length && (this.k[n] < kKeep || this.y[n] === null)) n++;
    if (n > 0) {
      this.x.splice(0, n);
      this.y.splice(0, n);
      this.k.splice(0, n);
    }
  }

  private _emit(x: number[], y: (number | null)[], ks: number[] | null): void {
    const s = this.scale;
    if (this._minI === this._maxI) {
      x.push(this._minX);
      y.push(this._minV * s);
      ks?.push(this._k);
    } else {
      const minFirst = this._minI < this._maxI;
      x.push(minFirst ? this._minX : this._maxX, minFirst ? this._maxX : this._minX);
      y.push((minFirst ? this._minV : this._maxV) * s, (minFirst ? this._maxV : this._minV) * s);
      ks?.push(this._k, this._k);
    }
  }
}

function scan(acc: MinMaxAccumulator, x: ArrayLike<number>, y: ArrayLike<number>, win: RingWindow, i0: number, i1: number, index0: number): void {
  const cap = win.capacity;
  let p = win.start + i0;
  if (p >= cap) p -= cap;
  for (let i = i0; i < i1; i++, p = p + 1 === cap ? 0 : p + 1) {
    const v = y[p];
    if (v === v) acc.push(x[p], v, index0 + i); // NaN skipped
  }
}

/** Stateless min/max decimation of logical samples [i0, i1) of a ring (or of a plain array, see linearWindow). */
export function decimateMinMax(x: ArrayLike<number>, y: ArrayLike<number>, win: RingWindow, o: DecimateOptions): Decimated {
  const i0 = Math.max(0, Math.min(o.i0, win.length));
  const i1 = Math.max(i0, Math.min(o.i1, win.length));
  const acc = new MinMaxAccumulator(bucketWidth(o.xFrom, o.xTo, o.buckets), o.gapX, o.scale ?? 1);
  scan(acc, x, y, win, i0, i1, 0);
  acc.flush();
  return { x: acc.x, y: acc.y };
}

/** What LiveDecimator needs of the ring (SampleRing fits). */
export interface GrowingColumns extends RingWindow {
  readonly t: ArrayLike<number>;
  /** Samples appended since the last clear; with length it gives each sample a lasting number. */
  readonly appended: number;
  /** Changes when the ring is cleared (a new snapshot). */
  readonly generation: number;
  lowerBound(x: number): number;
}

/**
 * Incremental min/max decimation of a live channel: each update scans only the samples that arrived since
 * the last one, keeps the finished buckets, and drops those that slid out of the window. At 1 kHz with a
 * five-minute window that is a few dozen samples per frame instead of 300 000. The result equals
 * decimateMinMax over the samples from the first kept bucket on (tested). Any change of bucket width, gap,
 * scale or ring generation starts over.
 */
export class LiveDecimator {
  private _acc: MinMaxAccumulator | null = null;
  private _key = '';
  private _generation = -1;
  private _y: ArrayLike<number> | null = null;
  /** Lasting number of the next sample to scan. */
  private _next = 0;

  /**
   * First logical index the current result covers (the stateless equivalent starts there). Decided with the
   * same floor(x / bw) as the buckets: comparing x with k * bw instead can disagree in the last bit.
   */
  firstIndex(ring: GrowingColumns, xFrom: number, bw: number): number {
    if (bw === Infinity) return 0;
    const kKeep = Math.floor(xFrom / bw) - 1;
    let i = ring.lowerBound(kKeep * bw);
    const k = (j: number) => {
      const p = ring.start + j;
      return Math.floor(ring.t[p >= ring.capacity ? p - ring.capacity : p] / bw);
    };
    while (i < ring.length && k(i) < kKeep) i++;
    while (i > 0 && k(i - 1) >= kKeep) i--;
    return i;
  }

  update(ring: GrowingColumns, y: ArrayLike<number>, xFrom: number, xTo: number, buckets: number, gapX: number, scale = 1): Decimated {
    const bw = bucketWidth(xFrom, xTo, buckets);
    const key = `${bw}|${gapX}|${scale}`;
    const base = ring.appended - ring.length; // lasting number of logical sample 0
    // Keep one bucket left of the window: the line then enters from the left edge.
    const kKeep = Math.floor(xFrom / bw) - 1;
    if (!this._acc || key !== this._key || ring.generation !== this._generation || y !== this._y || this._next < base) {
      this._acc = new MinMaxAccumulator(bw, gapX, scale);
      this._y = y;
      this._key = key;
      this._generation = ring.generation;
      this._next = base + this.firstIndex(ring, xFrom, bw);
    }
    scan(this._acc, ring.t, y, ring, this._next - base, ring.length, base);
    this._next = base + ring.length;
    if (bw !== Infinity) this._acc.trimBefore(kKeep);
    return this._acc.result();
  }
}

/**
 * Below this electrical power a thrust-per-watt figure is mostly sensor error divided by almost nothing: an
 * uncalibrated Hall current sensor's zero (0.1 to 0.3 A) on a 4-cell pack alone is 1.5 to 5 W, and an idling
 * ESC draws about a watt (common practice). The readout shows a dash there, and the cloud leaves such rows out.
 */
export const MIN_EFFICIENCY_POWER_W = 5;

/**
 * After a change of the throttle output, thrust and power are not each other's for this long: the ESC's soft
 * start and the rotor's inertia carry the speed (and the power) ahead of the thrust, and the load cell lags
 * behind its force (a 10 samples/s converter by a tenth of a second and more). Points in it are drawn apart.
 */
export const TRANSIENT_MS = 800;
/** An output change smaller than this is a held throttle, not a ramp (the wire carries four decimals). */
const OUTPUT_STEP = 0.0015;

export interface EfficiencyPoints {
  thrustN: number[];
  gramsPerWatt: number[];
  /** False for points taken while the throttle ramped or within TRANSIENT_MS after (spin-up, spin-down). */
  steady: boolean[];
}

/** Throttle output below which the propeller is taken as idle or spinning down: no efficiency point. */
export const MIN_EFFICIENCY_OUTPUT = 0.01;

/**
 * Pairs thrust with electrical power and returns thrust-per-watt points (gram-force per watt), one per thrust
 * sample. The channels come at different rates (a load cell at tens of hertz, power at hundreds), so each
 * thrust sample is paired with the mean of the power samples since the previous thrust sample (which also
 * smooths the ESC's ripple), or with the last power sample when none came in between and it is at most
 * holdMs old. Pairing on every power sample instead would draw vertical stripes of one stale thrust value.
 * Rows where the device reports an output below MIN_EFFICIENCY_OUTPUT are skipped: an idle or coasting
 * propeller's figure is noise over almost nothing.
 */
export function efficiencyPoints(
  t: ArrayLike<number>,
  thrust: ArrayLike<number>,
  power: ArrayLike<number>,
  win: RingWindow,
  i0: number,
  i1: number,
  out?: ArrayLike<number>,
  holdMs = 250,
  minPowerW = MIN_EFFICIENCY_POWER_W,
): EfficiencyPoints {
  const res: EfficiencyPoints = { thrustN: [], gramsPerWatt: [], steady: [] };
  const a = Math.max(0, Math.min(i0, win.length));
  const b = Math.max(a, Math.min(i1, win.length));
  pairRange(newPairState(), t, thrust, power, out, win, a, b, holdMs, minPowerW, (_t, th, gpw, steady) => {
    res.thrustN.push(th);
    res.gramsPerWatt.push(gpw);
    res.steady.push(steady);
  });
  return res;
}

/** What the pairing carries from one row to the next (see efficiencyPoints). */
interface PairState {
  lastP: number;
  lastPt: number;
  sumP: number;
  nP: number;
  lastOut: number;
  /** Host time of the last change of the output (a ramp step), or -Infinity. */
  outChangedAt: number;
}

function newPairState(): PairState {
  return { lastP: NaN, lastPt: -Infinity, sumP: 0, nP: 0, lastOut: NaN, outChangedAt: -Infinity };
}

/** Pairs logical rows [a, b) of a ring, carrying the state in s; emit gets (host time, thrust N, gf/W). */
function pairRange(
  s: PairState,
  t: ArrayLike<number>,
  thrust: ArrayLike<number>,
  power: ArrayLike<number>,
  out: ArrayLike<number> | undefined,
  win: RingWindow,
  a: number,
  b: number,
  holdMs: number,
  minPowerW: number,
  emit: (t: number, thrustN: number, gramsPerWatt: number, steady: boolean) => void,
): void {
  const cap = win.capacity;
  let { lastP, lastPt, sumP, nP, lastOut, outChangedAt } = s;
  let p = win.start + a;
  if (p >= cap) p -= cap;
  for (let i = a; i < b; i++, p = p + 1 === cap ? 0 : p + 1) {
    const tv = t[p];
    const pw = power[p];
    if (out) {
      const o = out[p];
      if (o === o) {
        if (lastOut === lastOut && Math.abs(o - lastOut) > OUTPUT_STEP) outChangedAt = tv;
        lastOut = o;
      }
    }
    if (pw === pw) {
      lastP = pw;
      lastPt = tv;
      sumP += pw;
      nP++;
    }
    const th = thrust[p];
    if (th !== th) continue;
    const pUsed = nP > 0 ? sumP / nP : tv - lastPt <= holdMs ? lastP : NaN;
    sumP = 0;
    nP = 0;
    if (!(pUsed >= minPowerW)) continue;
    if (lastOut < MIN_EFFICIENCY_OUTPUT) continue; // NaN (no output channel) passes
    emit(tv, th, th / GRAM_FORCE_N / pUsed, tv - outChangedAt >= TRANSIENT_MS);
  }
  s.lastP = lastP;
  s.lastPt = lastPt;
  s.sumP = sumP;
  s.nP = nP;
  s.lastOut = lastOut;
  s.outChangedAt = outChangedAt;
}

/** The thrust-per-watt points of a live window: views into LiveEfficiency's buffers, valid until its next update. */
export interface LivePoints {
  /** Host time of each point's thrust sample, ms, ascending. */
  t: Float64Array;
  thrustN: Float64Array;
  gramsPerWatt: Float64Array;
  /** 1 for a steady point, 0 for one taken in a ramp or spin-up/down (see TRANSIENT_MS). */
  steady: Uint8Array;
}

/**
 * efficiencyPoints kept up to date for a sliding window: each update pairs only the rows that arrived since
 * the last one (the pairing state carries over), appends their points and drops those older than the window.
 * At 1 kHz with a five-minute window that is about 50 rows an update instead of 300,000. It starts over when
 * the ring is cleared, when rows it had not read yet were overwritten, or when the window is widened past the
 * rows it has read. The points equal efficiencyPoints over the window, except that the first thrust sample of
 * the window is paired with the power since the sample before it rather than since the window's edge (tested).
 */
export class LiveEfficiency {
  private _t = new Float64Array(1024);
  private _x = new Float64Array(1024);
  private _y = new Float64Array(1024);
  private _s = new Uint8Array(1024);
  private _head = 0;
  private _tail = 0;
  private _state = newPairState();
  private _generation = -1;
  /** Lasting number (see GrowingColumns.appended) of the next row to read. */
  private _next = 0;
  /** Host time from which every row the ring still holds has been read. */
  private _from = Infinity;

  constructor(
    private readonly _holdMs = 250,
    private readonly _minPowerW = MIN_EFFICIENCY_POWER_W,
  ) {}

  update(ring: GrowingColumns, thrust: ArrayLike<number>, power: ArrayLike<number>, out: ArrayLike<number> | undefined, xFrom: number): LivePoints {
    const base = ring.appended - ring.length;
    if (ring.generation !== this._generation || this._next < base || xFrom < this._from) {
      this._generation = ring.generation;
      this._state = newPairState();
      this._head = this._tail = 0;
      this._next = base + ring.lowerBound(xFrom);
      this._from = xFrom;
    }
    pairRange(this._state, ring.t, thrust, power, out, ring, this._next - base, ring.length, this._holdMs, this._minPowerW, (t, th, gpw, st) => this._push(t, th, gpw, st));
    this._next = base + ring.length;
    this._from = Math.max(this._from, xFrom);
    while (this._head < this._tail && this._t[this._head] < xFrom) this._head++;
    return {
      t: this._t.subarray(this._head, this._tail),
      thrustN: this._x.subarray(this._head, this._tail),
      gramsPerWatt: this._y.subarray(this._head, this._tail),
      steady: this._s.subarray(this._head, this._tail),
    };
  }

  private _push(t: number, x: number, y: number, steady: boolean): void {
    if (this._tail === this._t.length) this._makeRoom();
    this._t[this._tail] = t;
    this._x[this._tail] = x;
    this._y[this._tail] = y;
    this._s[this._tail] = steady ? 1 : 0;
    this._tail++;
  }

  /** Moves the kept points to the front, doubling the buffers when they are more than half full. */
  private _makeRoom(): void {
    const live = this._tail - this._head;
    const cap = live * 2 > this._t.length ? this._t.length * 2 : this._t.length;
    const move = (a: Float64Array<ArrayBuffer>): Float64Array<ArrayBuffer> => {
      if (cap === a.length) return a.copyWithin(0, this._head, this._tail);
      const b = new Float64Array(cap);
      b.set(a.subarray(this._head, this._tail));
      return b;
    };
    this._t = move(this._t);
    this._x = move(this._x);
    this._y = move(this._y);
    if (cap === this._s.length) this._s.copyWithin(0, this._head, this._tail);
    else {
      const b = new Uint8Array(cap);
      b.set(this._s.subarray(this._head, this._tail));
      this._s = b;
    }
    this._head = 0;
    this._tail = live;
  }
}

export interface Thinned {
  x: number[];
  y: number[];
}

/**
 * Keeps at most one point per cell of a cols x rows grid spanning the points' own extent, preferring the
 * newest (drawn last, so on top). Output stays in the input's order.
 */
export function thinScatter(xs: ArrayLike<number>, ys: ArrayLike<number>, cols: number, rows: number): Thinned {
  // Called at 4 Hz over up to 300,000 points (five minutes at 1 kHz), so: two passes, finiteness as x - x === 0
  // (false for NaN and the infinities), truncation by | 0 (every operand is >= 0), and the kept indices
  // collected newest first, then read back in input order.
  const n = Math.min(xs.length, ys.length);
  let xMin = Infinity, xMax = -Infinity, yMin = Infinity, yMax = -Infinity;
  for (let i = 0; i < n; i++) {
    const x = xs[i], y = ys[i];
    if (x - x !== 0 || y - y !== 0) continue;
    if (x < xMin) xMin = x;
    if (x > xMax) xMax = x;
    if (y < yMin) yMin = y;
    if (y > yMax) yMax = y;
  }
  const out: Thinned = { x: [], y: [] };
  if (xMin > xMax) return out;
  const c = Math.max(1, Math.floor(cols));
  const r = Math.max(1, Math.floor(rows));
  const sx = xMax > xMin ? (c - 1e-9) / (xMax - xMin) : 0;
  const sy = yMax > yMin ? (r - 1e-9) / (yMax - yMin) : 0;
  const taken = new Uint8Array(c * r);
  const kept = new Int32Array(Math.min(n, c * r));
  let m = 0;
  for (let i = n - 1; i >= 0; i--) {
    const x = xs[i], y = ys[i];
    if (x - x !== 0 || y - y !== 0) continue;
    const cell = ((y - yMin) * sy | 0) * c + ((x - xMin) * sx | 0);
    if (taken[cell] !== 0) continue;
    taken[cell] = 1;
    kept[m++] = i;
  }
  out.x = new Array<number>(m);
  out.y = new Array<number>(m);
  for (let k = 0; k < m; k++) {
    const i = kept[m - 1 - k];
    out.x[k] = xs[i];
    out.y[k] = ys[i];
  }
  return out;
}
