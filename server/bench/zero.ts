// Zero before every run: is the stand at rest, and is its thrust reading steady enough to be the zero?
// Pure judgement, no clocks and no I/O; zero-service.ts takes the readings and keeps the zero in force.
//
// A load cell's zero moves between runs (temperature, creep, a cable pulled on, the propeller changed), and an
// offset of a fraction of a newton is most of the thrust at the first steps of a staircase: grams per watt
// there is then off by tens of percent against any prediction. So every run starts by reading the thrust with
// the motor at rest and taking that as zero. It is only a zero if the reading is steady: wind on the
// propeller, vibration from a neighbouring machine or something touching the stand shows as spread or slope,
// and taking it as zero would put that error into every point of the run. The criterion is the settle test's
// (sample standard deviation and least-squares slope, settle.ts) with limits for a stand at rest.
//
// After the run the thrust at rest is read again: the difference is the zero drift over the run (creep under
// load, the motor's heat reaching the cell). It is judged against the run's own thrust range: a drift of a
// small fraction of the range moves the run's low points by as much, relative to their thrust.

import { seriesStats } from '../sequence/settle.js';

export interface ZeroRules {
  /** Length of the at-rest reading, s. */
  window_s: number;
  /** Fewest thrust readings in the window (a 10 samples/s bridge converter gives 10 a second). */
  min_samples: number;
  /** Largest spread at rest: max(std_abs_N, std_rel x scale), N. */
  std_abs_N: number;
  std_rel: number;
  /** Largest slope at rest: max(slope_abs_N_per_s, slope_rel_per_s x scale), N/s. */
  slope_abs_N_per_s: number;
  slope_rel_per_s: number;
  /** Above this the rotor is still turning (only judged where the bench reports rpm). */
  rest_rpm: number;
  /** A post-run drift above this fraction of the run's thrust range warns and marks the session. */
  drift_fraction: number;
  /** Below this a drift is lost in the cell's noise and never warns, N. */
  drift_floor_N: number;
  /** How long the post-run reading may wait for the rotor to stop and the reading to settle, s. */
  after_wait_s: number;
  /**
   * A zero step within this long of the last disarm, or while the rotor still turns, waits for the rotor to
   * stop (up to after_wait_s) rather than refuse at once: a run started straight after the last one.
   */
  spin_down_s: number;
}

// Limits for the virtual bench's cell and a common bench cell (from the virtual bench's noise: 0.008 N at 80
// samples/s, 0.003 N at 10, no vibration at rest): a standard deviation of 0.03 N is about four times that, and
// the standard error of a one-second slope is about 0.003 N/s, so 0.05 N/s leaves room for honest noise while a
// propeller windmilling in a draught or a hand on the stand (tenths of a newton, swinging) is far outside.
// 1 % of the run's thrust range for the drift: a staircase's first step often sits at a tenth of the range, so
// a 1 % drift is already a 10 % error in that step's grams per watt.
export const DEFAULT_ZERO_RULES: Readonly<ZeroRules> = Object.freeze({
  window_s: 1,
  min_samples: 5,
  std_abs_N: 0.03,
  std_rel: 0.004,
  slope_abs_N_per_s: 0.05,
  slope_rel_per_s: 0.008,
  rest_rpm: 30,
  drift_fraction: 0.01,
  drift_floor_N: 0.01,
  after_wait_s: 8,
  spin_down_s: 3,
});

export interface RestReading {
  /** Host time, ms. */
  t: number;
  thrust: number | null;
  rpm: number | null;
}

export interface RestVerdict {
  steady: boolean;
  /** Mean thrust over the window (N, in the zero in force when it was read). */
  mean_N: number;
  std_N: number;
  slope_N_per_s: number;
  n: number;
  window_s: number;
  /** Highest rpm in the window, or null where the bench reports none. */
  rpm_max: number | null;
  /** The rotor was still turning (rpm above rest_rpm). */
  turning: boolean;
  std_limit_N: number;
  slope_limit_N_per_s: number;
  /** Why this is not a zero (empty when steady). */
  why: string;
}

/**
 * Judges one window of readings at rest. `scale_N` is a thrust the stand is expected to reach (the rig's
 * predicted full-throttle thrust), for the relative limits; null uses the absolute ones alone.
 */
export function judgeRest(readings: readonly RestReading[], rules: ZeroRules, scale_N: number | null): RestVerdict {
  const t: number[] = [];
  const x: number[] = [];
  let rpmMax: number | null = null;
  for (const r of readings) {
    if (r.thrust !== null && Number.isFinite(r.thrust)) {
      t.push(r.t / 1000);
      x.push(r.thrust);
    }
    if (r.rpm !== null && Number.isFinite(r.rpm)) rpmMax = Math.max(rpmMax ?? 0, r.rpm);
  }
  const s = seriesStats(t, x);
  const scale = scale_N !== null && scale_N > 0 ? scale_N : 0;
  const stdLimit = Math.max(rules.std_abs_N, rules.std_rel * scale);
  const slopeLimit = Math.max(rules.slope_abs_N_per_s, rules.slope_rel_per_s * scale);
  const why: string[] = [];
  const turning = rpmMax !== null && rpmMax > rules.rest_rpm;
  if (s.n < rules.min_samples) why.push(`only ${s.n} thrust readings in ${rules.window_s} s (need ${rules.min_samples}); is the load cell reporting?`);
  else {
    if (turning) why.push(`the rotor is still turning (${Math.round(rpmMax!)} rpm)`);
    const unsteady: string[] = [];
    if (!(s.std < stdLimit)) unsteady.push(`spread ${s.std.toFixed(3)} N, limit ${stdLimit.toFixed(3)} N`);
    if (!(Math.abs(s.slope) < slopeLimit)) unsteady.push(`drifting ${s.slope.toFixed(3)} N/s, limit ${slopeLimit.toFixed(3)} N/s`);
    if (unsteady.length) why.push(`thrust at rest is not steady (${unsteady.join('; ')}): wind or a draught on the propeller, vibration, or something touching the stand or its cables`);
  }
  return {
    steady: why.length === 0,
    mean_N: s.n > 0 ? s.mean : NaN,
    std_N: s.n > 0 ? s.std : NaN,
    slope_N_per_s: s.n > 0 ? s.slope : NaN,
    n: s.n,
    window_s: rules.window_s,
    rpm_max: rpmMax,
    turning,
    std_limit_N: stdLimit,
    slope_limit_N_per_s: slopeLimit,
    why: why.join('; '),
  };
}

export interface DriftVerdict {
  drift_N: number;
  range_N: number;
  /** |drift| / range, or null when the run made no thrust range to speak of. */
  fraction: number | null;
  limit_N: number;
  warned: boolean;
}

/** The zero's drift over a run (at rest after, minus at rest before) against the run's thrust range. */
export function judgeDrift(drift_N: number, range_N: number, rules: ZeroRules): DriftVerdict {
  const range = Number.isFinite(range_N) && range_N > 0 ? range_N : 0;
  const limit = Math.max(rules.drift_fraction * range, rules.drift_floor_N);
  return {
    drift_N,
    range_N: range,
    fraction: range > rules.drift_floor_N ? Math.abs(drift_N) / range : null,
    limit_N: limit,
    warned: Math.abs(drift_N) > limit,
  };
}
