// Settle detection: when is an operating point steady enough to measure?
//
// Over a sliding window (default 0.5 s) of the most recent readings, thrust and bus current are each called
// steady when BOTH
//   - their sample standard deviation is below max(std_abs, std_rel * |mean|), and
//   - the slope of a least-squares line through them is below max(slope_abs, slope_rel * |mean|) per second.
// The deviation test alone passes a slow, smooth drift (the rotor still spinning up through the ESC's soft
// start, the load cell's lag); the slope test alone passes a noisy but level signal that has not settled
// into its final vibration. Absolute floors keep the criterion reachable near zero thrust, relative terms
// keep it meaningful at high thrust where vibration noise grows.
//
// Current is judged only when current readings exist in the window (a rig may not measure it); thrust is
// always required. A channel with fewer than min_samples readings in the window is not steady yet.
//
// Defaults are set from the virtual bench's noise at 80 load-cell samples/s (about 0.01 N electrical noise
// plus vibration growing with rpm squared, 0.06 A current noise): the standard error of a 0.5 s slope is
// then about 0.05 N/s and 0.1 A/s, so the slope floors sit several standard errors above it while a real
// spin-up (several N/s) is far above them.

import type { ChannelSettle, SettleParams } from './types.js';

export const DEFAULT_SETTLE: Readonly<SettleParams> = Object.freeze({
  window_s: 0.5,
  min_samples: 5,
  thrust: Object.freeze({ std_abs: 0.05, std_rel: 0.02, slope_abs: 0.25, slope_rel: 0.04 }),
  current: Object.freeze({ std_abs: 0.15, std_rel: 0.03, slope_abs: 0.6, slope_rel: 0.06 }),
});

export interface SeriesVerdict {
  n: number;
  mean: number;
  std: number;
  /** Per second. */
  slope: number;
  stdLimit: number;
  slopeLimit: number;
  steady: boolean;
}

export interface SettleVerdict {
  steady: boolean;
  thrust: SeriesVerdict | null;
  current: SeriesVerdict | null;
  /** Why it is not steady yet (empty when steady). */
  why: string;
}

/** Mean, sample standard deviation and least-squares slope of x against t (t in seconds), in one pass. */
export function seriesStats(t: readonly number[], x: readonly number[]): { n: number; mean: number; std: number; slope: number } {
  const n = Math.min(t.length, x.length);
  if (n === 0) return { n: 0, mean: NaN, std: NaN, slope: NaN };
  // Centred on the first point so epoch-millisecond times do not eat the precision of the sums.
  const t0 = t[0];
  let st = 0;
  let sx = 0;
  for (let i = 0; i < n; i++) {
    st += t[i] - t0;
    sx += x[i];
  }
  const mt = st / n;
  const mx = sx / n;
  let stt = 0;
  let stx = 0;
  let sxx = 0;
  for (let i = 0; i < n; i++) {
    const dt = t[i] - t0 - mt;
    const dx = x[i] - mx;
    stt += dt * dt;
    stx += dt * dx;
    sxx += dx * dx;
  }
  return { n, mean: mx, std: n > 1 ? Math.sqrt(sxx / (n - 1)) : 0, slope: stt > 0 ? stx / stt : 0 };
}

export function judgeSeries(t: readonly number[], x: readonly number[], p: ChannelSettle, minSamples: number): SeriesVerdict {
  const s = seriesStats(t, x);
  const scale = Number.isFinite(s.mean) ? Math.abs(s.mean) : 0;
  const stdLimit = Math.max(p.std_abs, p.std_rel * scale);
  const slopeLimit = Math.max(p.slope_abs, p.slope_rel * scale);
  const steady = s.n >= minSamples && s.std < stdLimit && Math.abs(s.slope) < slopeLimit;
  return { ...s, stdLimit, slopeLimit, steady };
}

export interface SettleReading {
  /** Host time, ms. */
  t: number;
  thrust: number | null;
  current: number | null;
}

/**
 * Judges the readings of one window (the caller picks the window: the last settle.window_s seconds, none of
 * them older than the end of the ramp).
 */
export function judgeSettle(readings: readonly SettleReading[], params: SettleParams): SettleVerdict {
  const tT: number[] = [];
  const xT: number[] = [];
  const tI: number[] = [];
  const xI: number[] = [];
  for (const r of readings) {
    if (r.thrust !== null && Number.isFinite(r.thrust)) {
      tT.push(r.t / 1000);
      xT.push(r.thrust);
    }
    if (r.current !== null && Number.isFinite(r.current)) {
      tI.push(r.t / 1000);
      xI.push(r.current);
    }
  }
  const thrust = judgeSeries(tT, xT, params.thrust, params.min_samples);
  const current = xI.length > 0 ? judgeSeries(tI, xI, params.current, params.min_samples) : null;
  const why: string[] = [];
  for (const [name, v, unit] of [['thrust', thrust, 'N'], ['current', current, 'A']] as const) {
    if (!v || v.steady) continue;
    if (v.n < params.min_samples) why.push(`${name}: ${v.n} readings, need ${params.min_samples}`);
    else {
      if (!(v.std < v.stdLimit)) why.push(`${name} std ${v.std.toFixed(3)} ${unit} >= ${v.stdLimit.toFixed(3)}`);
      if (!(Math.abs(v.slope) < v.slopeLimit)) why.push(`${name} slope ${v.slope.toFixed(3)} ${unit}/s >= ${v.slopeLimit.toFixed(3)}`);
    }
  }
  return { steady: why.length === 0, thrust, current, why: why.join('; ') };
}
