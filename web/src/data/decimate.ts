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
  /** The x range shown; buckets split it evenly. */
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

export function decimateMinMax(x: ArrayLike<number>, y: ArrayLike<number>, win: RingWindow, o: DecimateOptions): Decimated {
  const out: Decimated = { x: [], y: [] };
  const i0 = Math.max(0, Math.min(o.i0, win.length));
  const i1 = Math.max(i0, Math.min(o.i1, win.length));
  const scale = o.scale ?? 1;
  const span = o.xTo - o.xFrom;
  const buckets = Math.max(1, Math.floor(o.buckets));
  // Few enough points to draw them all (the threshold counts every row, NaN included: cheap and safe).
  const raw = i1 - i0 <= 2 * buckets || !(span > 0);
  const bw = span / buckets;
  const cap = win.capacity;

  let lastX = NaN; // x of the last finite sample seen
  let cb = -1; // current bucket
  let minV = 0, maxV = 0, minX = 0, maxX = 0, minI = -1, maxI = -1;

  const flush = () => {
    if (minI < 0) return;
    if (minI === maxI) {
      out.x.push(minX);
      out.y.push(minV * scale);
    } else if (minI < maxI) {
      out.x.push(minX, maxX);
      out.y.push(minV * scale, maxV * scale);
    } else {
      out.x.push(maxX, minX);
      out.y.push(maxV * scale, minV * scale);
    }
    minI = maxI = -1;
  };

  let p = win.start + i0;
  if (p >= cap) p -= cap;
  for (let i = i0; i < i1; i++, p = p + 1 === cap ? 0 : p + 1) {
    const v = y[p];
    if (v !== v) continue; // NaN
    const xv = x[p];
    if (xv - lastX > o.gapX) {
      flush();
      cb = -1;
      out.x.push((lastX + xv) / 2);
      out.y.push(null);
    }
    lastX = xv;
    if (raw) {
      out.x.push(xv);
      out.y.push(v * scale);
      continue;
    }
    let b = Math.floor((xv - o.xFrom) / bw);
    if (b < 0) b = -1; // samples left of the window share one bucket (the line's entry point)
    else if (b >= buckets) b = buckets;
    if (b !== cb) {
      flush();
      cb = b;
    }
    if (minI < 0) {
      minV = maxV = v;
      minX = maxX = xv;
      minI = maxI = i;
    } else if (v < minV) {
      minV = v;
      minX = xv;
      minI = i;
    } else if (v > maxV) {
      maxV = v;
      maxX = xv;
      maxI = i;
    }
  }
  flush();
  return out;
}

/** Below this electrical power a thrust-per-watt figure is mostly sensor noise divided by almost nothing. */
export const MIN_EFFICIENCY_POWER_W = 1;

export interface EfficiencyPoints {
  thrustN: number[];
  gramsPerWatt: number[];
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
  const res: EfficiencyPoints = { thrustN: [], gramsPerWatt: [] };
  const a = Math.max(0, Math.min(i0, win.length));
  const b = Math.max(a, Math.min(i1, win.length));
  const cap = win.capacity;
  let lastP = NaN, lastPt = -Infinity, sumP = 0, nP = 0, lastOut = NaN;
  let p = win.start + a;
  if (p >= cap) p -= cap;
  for (let i = a; i < b; i++, p = p + 1 === cap ? 0 : p + 1) {
    const tv = t[p];
    const pw = power[p];
    if (out) {
      const o = out[p];
      if (o === o) lastOut = o;
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
    res.thrustN.push(th);
    res.gramsPerWatt.push(th / GRAM_FORCE_N / pUsed);
  }
  return res;
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
  const n = Math.min(xs.length, ys.length);
  let xMin = Infinity, xMax = -Infinity, yMin = Infinity, yMax = -Infinity;
  for (let i = 0; i < n; i++) {
    const x = xs[i], y = ys[i];
    if (!Number.isFinite(x) || !Number.isFinite(y)) continue;
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
  const keep = new Uint8Array(n);
  for (let i = n - 1; i >= 0; i--) {
    const x = xs[i], y = ys[i];
    if (!Number.isFinite(x) || !Number.isFinite(y)) continue;
    const cell = Math.floor((y - yMin) * sy) * c + Math.floor((x - xMin) * sx);
    if (taken[cell]) continue;
    taken[cell] = 1;
    keep[i] = 1;
  }
  for (let i = 0; i < n; i++) {
    if (keep[i]) {
      out.x.push(xs[i]);
      out.y.push(ys[i]);
    }
  }
  return out;
}
