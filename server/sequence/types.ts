// Shared types of the sequence runner: the flat plan a sequence file expands to, the settle parameters, and
// what a run produces. Pure declarations, no behaviour.

import type { OperatingPoint } from '../bench/operating-point.js';

export interface StepTiming {
  ramp_s: number;
  hold_s: number;
  window_s: number;
}

export interface PlannedStep extends StepTiming {
  /** Position in the flat plan, from 0. */
  index: number;
  throttle: number;
  /**
   * Field of the sequence file this throttle comes from, for error messages. For the inner steps of a
   * generator it is the end point that bounds them (a staircase step above the ceiling means its stop is).
   */
  origin: string;
  /** The value of that field. */
  originValue: number;
  /** 'up' or 'down' inside an up_down generator (hysteresis pairs), else null. */
  direction: 'up' | 'down' | null;
  label: string | null;
  /** Iteration of each enclosing repeat, outermost first (empty outside any repeat). */
  pass: number[];
}

export interface ChannelSettle {
  std_abs: number;
  std_rel: number;
  slope_abs: number;
  slope_rel: number;
}

export interface SettleParams {
  /** Sliding window the criterion looks at, seconds. */
  window_s: number;
  /** Fewest readings of a channel in the window before it can be called steady. */
  min_samples: number;
  thrust: ChannelSettle;
  current: ChannelSettle;
}

export interface CoolDownParams {
  /** null: take the rig's temperature limit when the run starts (refused if there is none). */
  limit_c: number | null;
  margin_c: number;
  throttle: number;
  resume_below_c: number;
  max_s: number;
}

export interface SequencePlan {
  name: string;
  description: string | null;
  steps: PlannedStep[];
  settle: SettleParams;
  coolDown: CoolDownParams | null;
  /** The sequence's own slew limit (throttle per second), or null to use the runner's. */
  maxSlewPerS: number | null;
}

/** Optional model prediction at a throttle and bus voltage (the integrator wires the performance model in). */
export type PredictFn = (
  throttle: number,
  voltage_V: number,
) => { thrust_N: number; power_W: number; grams_per_watt: number; grams_per_watt_lo?: number; grams_per_watt_hi?: number } | null;

/** An operating point with what the runner knows about how it was taken. */
export interface RunPoint extends OperatingPoint {
  /** Seconds from the end of the ramp to the start of the measurement window. */
  settle_s: number;
  direction: 'up' | 'down' | null;
  label: string | null;
  pass: number[];
}
