// First-order DC motor model (Drela, First-Order DC Electric Motor Model, MIT, 2007), an ESC and a supply
// that sags under load, and the operating point where the motor's torque meets the propeller's.
//
// Motor: v = Omega / Kv + i R,  Q = (i - i0) / Kv  (Kv in rad/s per volt), shaft power Q Omega.
// The no-load current i0 is what the motor draws spinning free at its no-load voltage; the first-order model
// keeps it constant. Iron losses make it grow with speed on real motors, so an optional exponent e scales it
// as i0 (Omega / Omega0)^e, Omega0 being the free-running speed at the no-load voltage; e = 0 (the default)
// is Drela's model exactly.
// ESC: throttle u sets the duty cycle d, which scales the bus voltage, v_motor = d V_bus - i R_esc. By default
// d = u. Many ESCs hold the output off over the bottom of the pulse range and then spread the rest over the
// full duty range (common practice: a start threshold of a few percent of the range); an optional throttle
// offset u0 models that as d = max(0, (u - u0) / (1 - u0)). It matters most at low throttle, where a few
// percent of duty are a large share of the motor voltage. Losses are either
// a constant efficiency (the ESC draws P_out / eta from the bus: i_bus = d i / eta) or a series resistance
// (i_bus = d i, and the i^2 R_esc loss appears through the lower motor voltage). Neither given: lossless.
// Supply: V_bus = V_open - R_internal i_bus, unless the bench measured V_bus, which then already contains
// the sag and is used as it is.
// Operating point: the unknown is the motor current. As it grows, the motor slows (more i R drop, more sag)
// while its torque rises and the propeller's torque falls, so torque balance has exactly one root between
// zero current and the current that stops the motor. A bracketed solve finds it without a starting guess.

import { radPerSecToRpm, rpmToRadPerSec, newtonsToGramForce } from './constants.js';
import { solveBracketed } from './numeric.js';

export interface MotorParams {
  kv_rpm_per_v: number;
  resistance_ohm: number;
  noLoadCurrent_a: number;
  noLoadVoltage_v: number;
  /** Speed exponent of the no-load current (0 = constant, the first-order model). */
  noLoadCurrentExponent?: number;
}

export interface EscParams {
  efficiency?: number;
  resistance_ohm?: number;
  /** Throttle fraction below which the ESC gives no output (0 = duty equals throttle). */
  throttleOffset?: number;
}

/** Duty cycle the ESC gives at a throttle: d = max(0, (u - u0) / (1 - u0)). */
export function escDuty(esc: EscParams, throttle: number): number {
  const u0 = esc.throttleOffset ?? 0;
  if (u0 === 0) return throttle;
  return Math.max(0, (throttle - u0) / (1 - u0));
}

/** Throttle that gives a duty cycle (the inverse of escDuty above the offset). */
export function throttleForDuty(esc: EscParams, duty: number): number {
  const u0 = esc.throttleOffset ?? 0;
  return u0 + duty * (1 - u0);
}

function checkEsc(esc: EscParams): void {
  const u0 = esc.throttleOffset ?? 0;
  if (!(Number.isFinite(u0) && u0 >= 0 && u0 < 0.5)) throw new RangeError(`esc.throttleOffset: must be within 0..0.5 (got ${u0})`);
}

export interface SupplyParams {
  /** Open-circuit voltage, used when no bus voltage was measured. */
  openCircuit_v: number;
  internalResistance_ohm: number;
}

export interface Drivetrain {
  motor: MotorParams;
  esc: EscParams;
  supply: SupplyParams;
}

/** What the motor drives: thrust and torque of the propeller against speed (rad/s). */
export interface PropellerLoad {
  thrustAt(omega: number): number;
  torqueAt(omega: number): number;
  /** Speed for a thrust (rad/s); NaN when no speed gives it. */
  omegaForThrust(thrust_N: number): number;
}

/** Kv in rad/s per volt. */
export function kvRadPerSecPerVolt(kv_rpm_per_v: number): number {
  return rpmToRadPerSec(kv_rpm_per_v);
}

function noLoadCurrentAt(m: MotorParams, omega: number): number {
  const e = m.noLoadCurrentExponent ?? 0;
  if (e === 0) return m.noLoadCurrent_a;
  const omega0 = kvRadPerSecPerVolt(m.kv_rpm_per_v) * (m.noLoadVoltage_v - m.noLoadCurrent_a * m.resistance_ohm);
  return m.noLoadCurrent_a * Math.pow(Math.max(0, omega) / omega0, e);
}

export interface MotorState {
  voltage_v: number;
  current_a: number;
  omega: number;
  rpm: number;
  torque_Nm: number;
  shaftPower_W: number;
  electricalPower_W: number;
  efficiency: number;
}

/** Motor at a terminal voltage and current (Drela's relations, evaluated directly). */
export function motorAtCurrent(m: MotorParams, voltage_v: number, current_a: number): MotorState {
  const kv = kvRadPerSecPerVolt(m.kv_rpm_per_v);
  const omega = Math.max(0, kv * (voltage_v - current_a * m.resistance_ohm));
  const i0 = noLoadCurrentAt(m, omega);
  const torque = Math.max(0, (current_a - i0) / kv);
  const shaft = torque * omega;
  const elec = voltage_v * current_a;
  return {
    voltage_v,
    current_a,
    omega,
    rpm: radPerSecToRpm(omega),
    torque_Nm: torque,
    shaftPower_W: shaft,
    electricalPower_W: elec,
    efficiency: elec > 0 ? shaft / elec : 0,
  };
}

/** Current of maximum efficiency at a voltage, i* = sqrt(i0 v / R), and the motor state there. */
export function maxEfficiencyPoint(m: MotorParams, voltage_v: number): MotorState & { etaMaxClosedForm: number } {
  const i = Math.sqrt((m.noLoadCurrent_a * voltage_v) / m.resistance_ohm);
  return {
    ...motorAtCurrent(m, voltage_v, i),
    etaMaxClosedForm: (1 - Math.sqrt((m.noLoadCurrent_a * m.resistance_ohm) / voltage_v)) ** 2,
  };
}

export interface OperatingPoint {
  throttle: number;
  busVoltage_V: number;
  /** Current drawn from the supply, what the bench's current sensor reads. */
  current_A: number;
  /** Electrical power drawn from the supply, V_bus * i_bus. */
  powerElectrical_W: number;
  motorVoltage_V: number;
  motorCurrent_A: number;
  rpm: number;
  torque_Nm: number;
  powerShaft_W: number;
  thrust_N: number;
  /** Thrust in gram-force per electrical watt. */
  gramsPerWatt: number;
  /** Shaft power over electrical power (motor and ESC together). */
  drivetrainEfficiency: number;
  /** True when the voltage cannot overcome the no-load current and the motor stands still. */
  stalled: boolean;
}

function escCurrentRatio(esc: EscParams): number {
  return 1 / (esc.efficiency ?? 1);
}

function finish(
  dt: Drivetrain,
  load: PropellerLoad,
  throttle: number,
  duty: number,
  vBus: number,
  iMotor: number,
  omega: number,
  stalled: boolean,
): OperatingPoint {
  const vMotor = duty * vBus - iMotor * (dt.esc.resistance_ohm ?? 0);
  const iBus = duty * iMotor * escCurrentRatio(dt.esc);
  const torque = stalled ? 0 : load.torqueAt(omega);
  const thrust = stalled ? 0 : load.thrustAt(omega);
  const pElec = vBus * iBus;
  const pShaft = torque * omega;
  return {
    throttle,
    busVoltage_V: vBus,
    current_A: iBus,
    powerElectrical_W: pElec,
    motorVoltage_V: vMotor,
    motorCurrent_A: iMotor,
    rpm: radPerSecToRpm(omega),
    torque_Nm: torque,
    powerShaft_W: pShaft,
    thrust_N: thrust,
    gramsPerWatt: pElec > 0 ? newtonsToGramForce(thrust) / pElec : 0,
    drivetrainEfficiency: pElec > 0 ? pShaft / pElec : 0,
    stalled,
  };
}

function checkThrottle(throttle: number): void {
  if (!(Number.isFinite(throttle) && throttle >= 0 && throttle <= 1)) {
    throw new RangeError(`throttle: must be a fraction within 0..1 (got ${throttle})`);
  }
}

/**
 * Operating point at a throttle. With busVoltage_V (measured at the ESC input) the supply model is skipped;
 * without it the bus voltage follows the supply's open-circuit voltage and internal resistance.
 */
export function solveOperatingPoint(dt: Drivetrain, load: PropellerLoad, throttle: number, busVoltage_V?: number): OperatingPoint {
  checkThrottle(throttle);
  checkEsc(dt.esc);
  const m = dt.motor;
  const kv = kvRadPerSecPerVolt(m.kv_rpm_per_v);
  const rEsc = dt.esc.resistance_ohm ?? 0;
  const busRatio = escCurrentRatio(dt.esc);
  const measured = busVoltage_V !== undefined;
  if (measured && !(Number.isFinite(busVoltage_V) && busVoltage_V > 0)) {
    throw new RangeError(`busVoltage_V: must be a positive finite number (got ${busVoltage_V})`);
  }
  const d = escDuty(dt.esc, throttle);
  const vBusAt = (iMotor: number): number =>
    measured ? (busVoltage_V as number) : dt.supply.openCircuit_v - dt.supply.internalResistance_ohm * d * iMotor * busRatio;
  if (d === 0) return finish(dt, load, throttle, 0, vBusAt(0), 0, 0, true);
  const omegaAt = (i: number): number => kv * (d * vBusAt(i) - i * (rEsc + m.resistance_ohm));
  // Current at which the motor stops: d V(i) = i (R + R_esc), linear in i.
  const rSupply = measured ? 0 : dt.supply.internalResistance_ohm * d * d * busRatio;
  const vOpen = measured ? (busVoltage_V as number) : dt.supply.openCircuit_v;
  const iStop = (d * vOpen) / (m.resistance_ohm + rEsc + rSupply);
  const residual = (i: number): number => {
    const w = Math.max(0, omegaAt(i));
    return (i - noLoadCurrentAt(m, w)) / kv - load.torqueAt(w);
  };
  if (!(residual(iStop) > 0)) {
    // Not even the no-load current flows against the motor's friction: it stands still, drawing v / R.
    return finish(dt, load, throttle, d, vBusAt(iStop), iStop, 0, true);
  }
  const i = solveBracketed(residual, 0, iStop, 1e-12, 200);
  return finish(dt, load, throttle, d, vBusAt(i), i, Math.max(0, omegaAt(i)), false);
}

/**
 * Operating point that makes a given thrust: the throttle is the unknown. Returns null when the thrust is
 * out of reach at full throttle (or needs more voltage than the supply can hold up).
 */
export function operatingPointForThrust(
  dt: Drivetrain,
  load: PropellerLoad,
  thrust_N: number,
  busVoltage_V?: number,
): OperatingPoint | null {
  if (!(Number.isFinite(thrust_N) && thrust_N >= 0)) throw new RangeError(`thrust_N: must be a non-negative finite number (got ${thrust_N})`);
  if (thrust_N === 0) return solveOperatingPoint(dt, load, 0, busVoltage_V);
  checkEsc(dt.esc);
  const m = dt.motor;
  const kv = kvRadPerSecPerVolt(m.kv_rpm_per_v);
  const omega = load.omegaForThrust(thrust_N);
  if (!(omega > 0)) return null;
  const iMotor = noLoadCurrentAt(m, omega) + kv * load.torqueAt(omega);
  // Voltage the ESC must deliver (motor back-EMF and resistive drops) from duty d: d V_bus(d) = vNeed.
  const vNeed = omega / kv + iMotor * (m.resistance_ohm + (dt.esc.resistance_ohm ?? 0));
  let d: number;
  let vBus: number;
  if (busVoltage_V !== undefined) {
    vBus = busVoltage_V;
    d = vNeed / vBus;
  } else {
    // d (V_open - R_int d i_m / eta) = vNeed: a quadratic in d; the smaller root is the physical one.
    const a = dt.supply.internalResistance_ohm * iMotor * escCurrentRatio(dt.esc);
    const V = dt.supply.openCircuit_v;
    if (a === 0) d = vNeed / V;
    else {
      const disc = V * V - 4 * a * vNeed;
      if (disc < 0) return null;
      d = (2 * vNeed) / (V + Math.sqrt(disc));
    }
    vBus = V - a * d;
  }
  if (!(d <= 1 + 1e-12)) return null;
  const duty = Math.min(1, d);
  return finish(dt, load, throttleForDuty(dt.esc, duty), duty, vBus, iMotor, omega, false);
}
