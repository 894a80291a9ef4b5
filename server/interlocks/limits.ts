// Host limits: the soft layer above the firmware's own. Defaults fit a small bench (a 10-inch propeller on a
// 4-cell pack); a rig file's `limits` section overrides them, validated like all configuration: unknown
// keys are errors, so a mistyped limit never silently falls back to a default.

import { DEFAULT_BAD_LINE_BURST, DEFAULT_STALE_MS, DEFAULT_THRUST_STALE_MS } from '../../firmware-protocol/src/host-rules.js';

export interface Limits {
  /** Bus current (A). */
  max_current_a: number;
  /** Electrical power (W). */
  max_power_w: number;
  /** Thrust (N). */
  max_thrust_n: number;
  /** Motor temperature (degC). */
  max_temp_c: number;
  /** Warn this far below max_temp_c (degC). */
  temp_warn_margin_c: number;
  /** Shaft speed (rpm). */
  max_rpm: number;
  /** Blade-tip Mach number: warn at, trip at (needs the propeller diameter). */
  tip_mach_warn: number;
  tip_mach_trip: number;
  /** Loaded pack voltage per cell: warn below, trip below (V). */
  cell_warn_v: number;
  min_cell_v: number;
  /** Cells in series; 0 = infer from the first reading while disarmed (ceil(V / 4.25)). */
  cells: number;
  /** Thrust fluctuation (N, standard deviation about the local trend over `vibration_window_s`). */
  vibration_std_n: number;
  vibration_window_s: number;
  /** No telemetry frame for this long while the motor may turn (ms). */
  stale_ms: number;
  /** Thrust channel silent for this long while the motor may turn (ms). */
  thrust_stale_ms: number;
  /** Bad lines (checksum and other decode failures) within one second. */
  bad_line_burst: number;
  /** Thrust magnitude with the output at zero for over a second: a loose rig or a drifting load cell (N). */
  zero_throttle_thrust_n: number;
  /** Measured-versus-predicted grams per watt, once steady (%). */
  deviation_warn_pct: number;
  deviation_trip_pct: number;
  /** Fastest upward throttle change (fraction per second); downward is never limited. */
  max_slew_per_s: number;
  /** Highest throttle this rig may be given (0..1), below the device's own ceiling when lower: refused above, never clamped. */
  max_throttle: number;
  /** How long a reading must stay past a trip threshold before it trips (ms): one noisy sample is not a fault. */
  debounce_ms: number;
}

export const DEFAULT_LIMITS: Readonly<Limits> = Object.freeze({
  max_current_a: 40,
  max_power_w: 700,
  max_thrust_n: 40,
  max_temp_c: 90,
  temp_warn_margin_c: 10,
  max_rpm: 20_000,
  tip_mach_warn: 0.5,
  tip_mach_trip: 0.7,
  cell_warn_v: 3.5,
  min_cell_v: 3.3,
  cells: 0,
  vibration_std_n: 1.5,
  vibration_window_s: 0.5,
  stale_ms: DEFAULT_STALE_MS,
  thrust_stale_ms: DEFAULT_THRUST_STALE_MS,
  bad_line_burst: DEFAULT_BAD_LINE_BURST,
  zero_throttle_thrust_n: 1.0,
  deviation_warn_pct: 15,
  deviation_trip_pct: 40,
  max_slew_per_s: 1.0,
  max_throttle: 1.0,
  debounce_ms: 30,
});

/** Valid range of each limit (inclusive). A value outside is a configuration error, not clamped. */
const RANGES: Record<keyof Limits, [number, number]> = {
  max_current_a: [0.1, 500],
  max_power_w: [1, 20_000],
  max_thrust_n: [0.1, 2000],
  max_temp_c: [20, 200],
  temp_warn_margin_c: [0, 100],
  max_rpm: [100, 200_000],
  tip_mach_warn: [0.05, 1],
  tip_mach_trip: [0.05, 1],
  cell_warn_v: [2.5, 4.5],
  min_cell_v: [2.5, 4.2],
  cells: [0, 24],
  vibration_std_n: [0.01, 100],
  vibration_window_s: [0.1, 5],
  stale_ms: [20, 5000],
  thrust_stale_ms: [50, 10_000],
  bad_line_burst: [1, 10_000],
  zero_throttle_thrust_n: [0.01, 100],
  deviation_warn_pct: [1, 500],
  deviation_trip_pct: [1, 1000],
  max_slew_per_s: [0.01, 100],
  max_throttle: [0.05, 1],
  debounce_ms: [0, 2000],
};

export class LimitsError extends Error {
  override name = 'LimitsError';
}

/** Validates a `limits` object and merges it over the defaults. Throws LimitsError naming the key and the rule. */
export function parseLimits(raw: unknown, where = 'limits'): Limits {
  if (raw === undefined || raw === null) return { ...DEFAULT_LIMITS };
  if (typeof raw !== 'object' || Array.isArray(raw)) throw new LimitsError(`${where}: must be an object`);
  const out: Limits = { ...DEFAULT_LIMITS };
  for (const [k, v] of Object.entries(raw as Record<string, unknown>)) {
    if (!Object.prototype.hasOwnProperty.call(RANGES, k)) {
      throw new LimitsError(`${where}.${k}: unknown limit (known: ${Object.keys(RANGES).join(', ')})`);
    }
    const key = k as keyof Limits;
    const [lo, hi] = RANGES[key];
    if (typeof v !== 'number' || !Number.isFinite(v)) throw new LimitsError(`${where}.${k}: must be a finite number`);
    if (v < lo || v > hi) throw new LimitsError(`${where}.${k}: ${v} is outside ${lo}..${hi}`);
    if (key === 'cells' && !Number.isInteger(v)) throw new LimitsError(`${where}.cells: must be a whole number`);
    out[key] = v;
  }
  if (out.tip_mach_warn > out.tip_mach_trip) throw new LimitsError(`${where}.tip_mach_warn: must not exceed tip_mach_trip (${out.tip_mach_trip})`);
  if (out.cell_warn_v < out.min_cell_v) throw new LimitsError(`${where}.cell_warn_v: must not be below min_cell_v (${out.min_cell_v})`);
  if (out.deviation_warn_pct > out.deviation_trip_pct) throw new LimitsError(`${where}.deviation_warn_pct: must not exceed deviation_trip_pct (${out.deviation_trip_pct})`);
  return out;
}

export const LIMIT_KEYS = Object.keys(RANGES) as (keyof Limits)[];
