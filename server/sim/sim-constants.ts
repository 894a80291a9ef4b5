// The virtual bench's "truth" constants: everything about the simulated hardware that a rig file does not
// say and a prediction model has to find out by calibration (loss factors, sensor offsets, noise, lags,
// firmware limits). They live in the optional `sim` section of a rig file; every key is optional, unknown
// keys are errors (a misspelt noise level must not pass silently), and each value is range-checked here.

export interface SimConstants {
  // ---- channels the simulated firmware fits, in samples per second (0: not fitted)
  /** Load-cell bridge ADC rate: the common 24-bit bridge converters offer 10 or 80 samples/s. */
  thrust_rate_hz: 10 | 80;
  voltage_rate_hz: number;
  current_rate_hz: number;
  rpm_rate_hz: number;
  temp_rate_hz: number;
  torque_rate_hz: number;

  // ---- firmware
  throttle_ceiling: number;
  heartbeat_timeout_ms: number;
  esc_rate_hz: number;
  /** Firmware's own hard current limit and how long it may be exceeded before the cut. */
  overcurrent_a: number;
  overcurrent_ms: number;
  /** Bus-voltage floor; 0 picks 3.0 V per cell (or 70 % of a fixed supply). */
  brownout_v: number;
  brownout_ms: number;
  /** No load-cell sample for this long latches 'sensor'; 0 disables the watchdog. */
  sensor_timeout_ms: number;
  stat_period_ms: number;

  // ---- air
  air_density_kg_m3: number;
  ambient_c: number;

  // ---- propeller (static coefficients CT = T/(rho n^2 D^4), CP = P/(rho n^3 D^5)); 0 derives from pitch/diameter
  ct_static: number;
  /** CT grows with Reynolds number: CT = ct_static (1 + ct_re_slope ln(rpm / ref_rpm)). */
  ct_re_slope: number;
  /** Induced-power factor over momentum theory (tip loss, swirl, non-uniform inflow). */
  kappa_induced: number;
  /** Profile-power coefficient at ref_rpm; 0 derives from pitch/diameter. */
  cp_profile: number;
  /** Profile drag falls with Reynolds number: cp_profile (rpm / ref_rpm)^cp_re_exponent. */
  cp_re_exponent: number;
  /** Multiplies the profile power (surface finish, blade damage). */
  profile_drag_factor: number;
  ref_rpm: number;
  /** Rotating inertia (propeller + motor bell); 0 derives from the masses. */
  inertia_kg_m2: number;

  // ---- ESC
  /** Output below this throttle does not turn the motor (start threshold). */
  esc_deadband: number;
  /** At zero output the ESC shorts the windings (brake): the rotor stops in a fraction of a second. */
  esc_brake: boolean;
  esc_idle_current_a: number;
  /** Soft start: the ESC raises its duty at most this much per second (it drops it at once). */
  esc_ramp_per_s: number;
  /** Used when the rig gives neither efficiency nor resistance. */
  esc_efficiency_default: number;

  // ---- motor
  /** Copper temperature coefficient of resistance, per kelvin. */
  copper_alpha_per_k: number;
  /** Share of the no-load current that grows with speed (iron losses); the rest is constant friction. */
  iron_loss_speed_fraction: number;
  winding_heat_capacity_j_per_k: number;
  case_heat_capacity_j_per_k: number;
  winding_to_case_k_per_w: number;
  case_to_ambient_k_per_w: number;
  /** Propeller wash cooling: case-to-ambient resistance divided by (1 + gain * rpm / 10000). */
  cooling_gain: number;

  // ---- battery
  initial_soc: number;
  /** Polarisation (slow) part of the sag: resistance as a fraction of the internal resistance, and its time constant. */
  polarisation_fraction: number;
  polarisation_time_s: number;

  // ---- duct (tables in truth.ts; these scale them)
  /** Fraction of the tabulated augmentation a perfect (tight, well-lipped) duct realises. */
  duct_efficiency: number;
  /** Multiplies the tip gap before the gap table is read (2: the duct behaves as if its gap were twice as wide). */
  duct_gap_sensitivity: number;
  /** Divides the lip radius before the lip table is read (2: a lip needs to be twice as large for the same effect). */
  duct_lip_scale: number;
  /** Multiplies the diffuser's tabulated stall-onset angle. */
  diffuser_stall_factor: number;
  /** Rotor plane position from the inlet, as a fraction of the duct length. */
  duct_rotor_position: number;
  /** Wall friction: thrust lost per unit of length / diameter. */
  duct_wall_friction: number;

  // ---- sensors
  thrust_noise_n: number;
  /** Vibration noise on the load cell at 10000 rpm (grows with rpm squared). */
  thrust_vibration_n: number;
  thrust_offset_n: number;
  thrust_scale: number;
  thrust_lag_ms: number;
  thrust_resolution_n: number;
  thrust_drift_n_per_min: number;
  voltage_noise_v: number;
  voltage_scale: number;
  voltage_offset_v: number;
  current_noise_a: number;
  current_scale: number;
  current_offset_a: number;
  rpm_noise_fraction: number;
  temp_noise_c: number;
  temp_offset_c: number;
  torque_noise_nm: number;
}

export const SIM_DEFAULTS: Readonly<SimConstants> = Object.freeze({
  thrust_rate_hz: 80,
  // 100 samples/s, as the reference firmware: the telemetry of these rates fits 115200 baud (PROTOCOL.md, byte budget).
  voltage_rate_hz: 100,
  current_rate_hz: 100,
  rpm_rate_hz: 100,
  temp_rate_hz: 10,
  torque_rate_hz: 0,

  throttle_ceiling: 0.9,
  heartbeat_timeout_ms: 300,
  esc_rate_hz: 400,
  overcurrent_a: 45,
  overcurrent_ms: 5,
  brownout_v: 0,
  brownout_ms: 50,
  sensor_timeout_ms: 500,
  stat_period_ms: 100,

  air_density_kg_m3: 1.19,
  ambient_c: 22,

  ct_static: 0,
  ct_re_slope: 0.06,
  kappa_induced: 1.2,
  cp_profile: 0,
  cp_re_exponent: -0.2,
  profile_drag_factor: 1,
  ref_rpm: 6000,
  inertia_kg_m2: 0,

  esc_deadband: 0.04,
  esc_brake: true,
  esc_idle_current_a: 0.06,
  esc_ramp_per_s: 3,
  esc_efficiency_default: 0.95,

  copper_alpha_per_k: 0.00393,
  iron_loss_speed_fraction: 0.5,
  winding_heat_capacity_j_per_k: 12,
  case_heat_capacity_j_per_k: 45,
  winding_to_case_k_per_w: 0.8,
  case_to_ambient_k_per_w: 5,
  cooling_gain: 3,

  initial_soc: 0.9,
  polarisation_fraction: 0.35,
  polarisation_time_s: 15,

  duct_efficiency: 0.85,
  duct_gap_sensitivity: 1,
  duct_lip_scale: 1,
  diffuser_stall_factor: 1,
  duct_rotor_position: 0.3,
  duct_wall_friction: 0.01,

  thrust_noise_n: 0.008,
  thrust_vibration_n: 0.03,
  thrust_offset_n: 0.8,
  thrust_scale: 1.012,
  thrust_lag_ms: 20,
  thrust_resolution_n: 0.0002,
  thrust_drift_n_per_min: 0.004,
  voltage_noise_v: 0.02,
  voltage_scale: 1.004,
  voltage_offset_v: 0,
  current_noise_a: 0.06,
  current_scale: 0.985,
  current_offset_a: 0.12,
  rpm_noise_fraction: 0.003,
  temp_noise_c: 0.15,
  temp_offset_c: 0.8,
  torque_noise_nm: 0.002,
});

type Rule = { min: number; max: number; int?: boolean; oneOf?: readonly number[] } | 'bool';

// Ranges are what the simulator can run stably (the tick is 0.5 ms, so no channel faster than 1000 /s),
// not what hardware could do.
const RULES: { [K in keyof SimConstants]: Rule } = {
  thrust_rate_hz: { min: 10, max: 80, oneOf: [10, 80] },
  voltage_rate_hz: { min: 0, max: 1000 },
  current_rate_hz: { min: 0, max: 1000 },
  rpm_rate_hz: { min: 0, max: 1000 },
  temp_rate_hz: { min: 0, max: 1000 },
  torque_rate_hz: { min: 0, max: 1000 },
  throttle_ceiling: { min: 0, max: 1 },
  heartbeat_timeout_ms: { min: 20, max: 5000, int: true },
  esc_rate_hz: { min: 1, max: 2000, int: true },
  overcurrent_a: { min: 0.1, max: 1000 },
  overcurrent_ms: { min: 0, max: 10000 },
  brownout_v: { min: 0, max: 1000 },
  brownout_ms: { min: 0, max: 10000 },
  sensor_timeout_ms: { min: 0, max: 60000 },
  stat_period_ms: { min: 10, max: 200 },
  air_density_kg_m3: { min: 0.3, max: 2 },
  ambient_c: { min: -40, max: 60 },
  ct_static: { min: 0, max: 0.5 },
  ct_re_slope: { min: -0.5, max: 0.5 },
  kappa_induced: { min: 1, max: 3 },
  cp_profile: { min: 0, max: 0.5 },
  cp_re_exponent: { min: -1, max: 1 },
  profile_drag_factor: { min: 0, max: 10 },
  ref_rpm: { min: 100, max: 100000 },
  inertia_kg_m2: { min: 0, max: 1 },
  esc_deadband: { min: 0, max: 0.5 },
  esc_brake: 'bool',
  esc_idle_current_a: { min: 0, max: 5 },
  esc_ramp_per_s: { min: 0.1, max: 1000 },
  esc_efficiency_default: { min: 0.3, max: 1 },
  copper_alpha_per_k: { min: 0, max: 0.01 },
  iron_loss_speed_fraction: { min: 0, max: 1 },
  winding_heat_capacity_j_per_k: { min: 0.1, max: 10000 },
  case_heat_capacity_j_per_k: { min: 0.1, max: 10000 },
  winding_to_case_k_per_w: { min: 0.01, max: 100 },
  case_to_ambient_k_per_w: { min: 0.01, max: 100 },
  cooling_gain: { min: 0, max: 100 },
  initial_soc: { min: 0, max: 1 },
  polarisation_fraction: { min: 0, max: 5 },
  polarisation_time_s: { min: 0.1, max: 10000 },
  duct_efficiency: { min: 0, max: 1 },
  duct_gap_sensitivity: { min: 0, max: 10 },
  duct_lip_scale: { min: 0.01, max: 10 },
  diffuser_stall_factor: { min: 0.1, max: 5 },
  duct_rotor_position: { min: 0, max: 1 },
  duct_wall_friction: { min: 0, max: 1 },
  thrust_noise_n: { min: 0, max: 100 },
  thrust_vibration_n: { min: 0, max: 100 },
  thrust_offset_n: { min: -1000, max: 1000 },
  thrust_scale: { min: 0.5, max: 2 },
  thrust_lag_ms: { min: 0, max: 10000 },
  thrust_resolution_n: { min: 0, max: 10 },
  thrust_drift_n_per_min: { min: -100, max: 100 },
  voltage_noise_v: { min: 0, max: 100 },
  voltage_scale: { min: 0.5, max: 2 },
  voltage_offset_v: { min: -100, max: 100 },
  current_noise_a: { min: 0, max: 100 },
  current_scale: { min: 0.5, max: 2 },
  current_offset_a: { min: -100, max: 100 },
  rpm_noise_fraction: { min: 0, max: 1 },
  temp_noise_c: { min: 0, max: 100 },
  temp_offset_c: { min: -100, max: 100 },
  torque_noise_nm: { min: 0, max: 100 },
};

export class SimConfigError extends Error {
  override name = 'SimConfigError';
}

/**
 * Merges a rig file's `sim` section over the defaults. Throws SimConfigError naming the field
 * (`where` prefixes it, e.g. "rig.sim") on an unknown key or a value out of range.
 */
export function parseSimConstants(raw: unknown, where = 'sim'): SimConstants {
  const out: SimConstants = { ...SIM_DEFAULTS };
  if (raw === undefined || raw === null) return out;
  if (typeof raw !== 'object' || Array.isArray(raw)) throw new SimConfigError(`${where} must be an object`);
  const rec = raw as Record<string, unknown>;
  const o = out as unknown as Record<string, unknown>;
  for (const key of Object.keys(rec)) {
    if (!Object.prototype.hasOwnProperty.call(RULES, key)) {
      throw new SimConfigError(`${where}.${key} is not a known virtual-bench constant`);
    }
    const rule = RULES[key as keyof SimConstants];
    const v = rec[key];
    if (rule === 'bool') {
      if (typeof v !== 'boolean') throw new SimConfigError(`${where}.${key} must be true or false`);
      o[key] = v;
      continue;
    }
    if (typeof v !== 'number' || !Number.isFinite(v)) throw new SimConfigError(`${where}.${key} must be a number`);
    if (v < rule.min || v > rule.max) throw new SimConfigError(`${where}.${key} = ${v} is outside ${rule.min}..${rule.max}`);
    if (rule.int && !Number.isInteger(v)) throw new SimConfigError(`${where}.${key} must be an integer`);
    if (rule.oneOf && !rule.oneOf.includes(v)) throw new SimConfigError(`${where}.${key} must be one of ${rule.oneOf.join(', ')}`);
    o[key] = v;
  }
  return out;
}
