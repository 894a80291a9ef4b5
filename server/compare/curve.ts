// Piecewise-linear curves through measured operating points. Pure. A curve answers only inside the range it
// was measured over: outside it returns null, never an extrapolated guess.

import type { OperatingPoint } from '../bench/operating-point.js';

/** One operating point reduced to what the comparison needs (means and sample standard deviations). */
export interface MeasuredPoint {
  thrust_N: number;
  thrust_std_N: number;
  power_W: number;
  power_std_W: number;
  /** Thrust in gram-force per electrical watt. */
  grams_per_watt: number;
}

/** g0 in m/s^2 (CGPM 1901; ISO 80000-3); gram-force per newton follows from it. */
export const G0 = 9.80665;

/** Points with a positive thrust and power (idle steps and points lacking a channel carry no curve information). */
export function measuredPoints(points: readonly OperatingPoint[]): MeasuredPoint[] {
  const out: MeasuredPoint[] = [];
  for (const p of points) {
    const t = p.channels.thrust;
    const w = p.channels.power;
    if (!t || !w || !(t.mean > 0) || !(w.mean > 0) || !Number.isFinite(t.mean) || !Number.isFinite(w.mean)) continue;
    out.push({ thrust_N: t.mean, thrust_std_N: t.std || 0, power_W: w.mean, power_std_W: w.std || 0, grams_per_watt: t.mean / G0 / 1e-3 / w.mean });
  }
  return out;
}

/** Knots with strictly increasing x; y and its spread at each knot. */
export interface Curve {
  x: number[];
  y: number[];
  /** Spread of y at the knot. */
  ySd: number[];
  /** Spread of x at the knot. */
  xSd: number[];
}

/**
 * Sorts by x and merges points with the same x (repeated sweeps hitting the same thrust) into their mean, so the
 * knots are strictly increasing. Spreads of merged points are pooled (root mean square).
 */
export function buildCurve(pts: readonly { x: number; y: number; xSd: number; ySd: number }[]): Curve {
  const sorted = [...pts].filter((p) => Number.isFinite(p.x) && Number.isFinite(p.y)).sort((a, b) => a.x - b.x);
  const c: Curve = { x: [], y: [], ySd: [], xSd: [] };
  let i = 0;
  while (i < sorted.length) {
    let j = i;
    let sy = 0;
    let sys = 0;
    let sxs = 0;
    while (j < sorted.length && sorted[j].x === sorted[i].x) {
      sy += sorted[j].y;
      sys += sorted[j].ySd ** 2;
      sxs += sorted[j].xSd ** 2;
      j++;
    }
    const n = j - i;
    c.x.push(sorted[i].x);
    c.y.push(sy / n);
    c.ySd.push(Math.sqrt(sys / n));
    c.xSd.push(Math.sqrt(sxs / n));
    i = j;
  }
  return c;
}

export interface CurveValue {
  y: number;
  /** dy/dx of the segment used. */
  slope: number;
  ySd: number;
  xSd: number;
}

/** Relative slack at the ends so a grid point computed as exactly the end of the range is not refused by rounding. */
const END_SLACK = 1e-9;

/** Linear interpolation; null outside [x0, xn] (or with fewer than two knots). */
export function evaluate(c: Curve, x: number): CurveValue | null {
  const n = c.x.length;
  if (n < 2 || !Number.isFinite(x)) return null;
  const lo = c.x[0];
  const hi = c.x[n - 1];
  const slack = (hi - lo) * END_SLACK;
  if (x < lo - slack || x > hi + slack) return null;
  const xc = Math.min(hi, Math.max(lo, x));
  // Binary search for the segment [k, k+1] holding xc.
  let a = 0;
  let b = n - 1;
  while (b - a > 1) {
    const m = (a + b) >> 1;
    if (c.x[m] <= xc) a = m;
    else b = m;
  }
  const f = (xc - c.x[a]) / (c.x[b] - c.x[a]);
  const lerp = (v: number[]) => v[a] + f * (v[b] - v[a]);
  return { y: lerp(c.y), slope: (c.y[b] - c.y[a]) / (c.x[b] - c.x[a]), ySd: lerp(c.ySd), xSd: lerp(c.xSd) };
}

export function range(c: Curve): [number, number] | null {
  return c.x.length >= 2 ? [c.x[0], c.x[c.x.length - 1]] : null;
}

/** Power against thrust. */
export function powerCurve(pts: readonly MeasuredPoint[]): Curve {
  return buildCurve(pts.map((p) => ({ x: p.thrust_N, y: p.power_W, xSd: p.thrust_std_N, ySd: p.power_std_W })));
}

/** Thrust against power (for "thrust at equal power"). */
export function thrustCurve(pts: readonly MeasuredPoint[]): Curve {
  return buildCurve(pts.map((p) => ({ x: p.power_W, y: p.thrust_N, xSd: p.power_std_W, ySd: p.thrust_std_N })));
}

/**
 * Spread of y at x from both the y spread and the x spread carried through the local slope (first-order
 * propagation, the two taken as independent).
 */
export function effectiveSd(v: CurveValue): number {
  return Math.hypot(v.ySd, v.slope * v.xSd);
}

/** n evenly spaced values from lo to hi inclusive. */
export function grid(lo: number, hi: number, n: number): number[] {
  if (n < 2 || hi <= lo) return [lo];
  return Array.from({ length: n }, (_, i) => (i === n - 1 ? hi : lo + ((hi - lo) * i) / (n - 1)));
}
