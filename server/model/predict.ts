// Prediction of a rig's bench performance: the curve of thrust, electrical power, current, rpm and grams
// per watt against throttle (or at chosen thrusts), with the momentum-theory ideal lines for reference, and
// the deviation of a measured operating point from the prediction.
//
// A RigModel is built once from a rig and the air (inflow solved, duct losses evaluated) and then evaluated
// as often as needed; building is the only costly step. Without a measured bus voltage the supply's
// open-circuit voltage is the cell count times PACK_CELL_VOLTAGE, 4.1 V: a lithium-polymer cell at rest near
// 90 % state of charge, the state a bench run starts in (common practice: 4.20 V full, 3.7 V nominal, about
// 4.1 V after the first minutes off the charger), or the bench supply's set voltage; it sags through the
// internal resistance. The nominal 3.7 V would be a pack near half charge and predicts about 10 % less
// speed at full throttle than a charged pack gives.

import { SEA_LEVEL_AIR, type AirState } from './atmosphere.js';
import type { AirfoilPolar } from './airfoil.js';
import { bladeFromPropeller, omegaForThrust, prepareRotor, rotorAt, type AeroFactors, type BemtRotor, type InflowModel } from './bemt.js';
import { newtonsToGramForce } from './constants.js';
import { ductCondition, type DuctCondition, type DuctLossCoefficients } from './duct-losses.js';
import { diskArea, figureOfMeritOpen, figureOfMeritShrouded, idealPowerDucted, idealPowerOpen } from './momentum.js';
import {
  operatingPointForThrust,
  solveOperatingPoint,
  type Drivetrain,
  type MotorParams,
  type OperatingPoint,
  type PropellerLoad,
} from './motor.js';
import { rigGeometry, type RigGeometry } from './rig.js';
import type { RigSpec } from './rig-types.js';
import { tableLoad } from './static-table.js';

/** Resting voltage of a charged lithium-polymer cell, about 90 % state of charge (common practice). */
export const PACK_CELL_VOLTAGE = 4.1;

export interface ModelOptions {
  air?: AirState;
  factors?: Partial<AeroFactors>;
  polar?: Partial<AirfoilPolar>;
  /** Overrides of the duct-loss coefficients (duct-losses.ts); calibration of a ducted sweep fits these. */
  ductLosses?: Partial<DuctLossCoefficients>;
  /** Blade stations (default 40). */
  stations?: number;
  tipLoss?: boolean;
  /** ESC throttle offset (see motor.ts); the rig file has no field for it, calibration fits it. */
  esc?: { throttleOffset?: number };
  /** Overrides of the rig's motor constants (calibration fits these). */
  motor?: Partial<Pick<MotorParams, 'resistance_ohm' | 'noLoadCurrent_a' | 'noLoadCurrentExponent'>>;
  /** Supply open-circuit voltage; default from the rig's cells or voltage_v. */
  openCircuitVoltage_v?: number;
  /** 'auto' uses the propeller's static table for an open rig when there is one, else BEMT. */
  propellerSource?: 'auto' | 'bemt' | 'table';
}

export interface RigModel {
  readonly rig: RigSpec;
  readonly air: AirState;
  readonly geometry: RigGeometry;
  readonly duct: DuctCondition | null;
  /** The BEMT rotor, or null when the propeller is described by its static table. */
  readonly rotor: BemtRotor | null;
  readonly source: 'bemt' | 'table';
  readonly load: PropellerLoad;
  readonly drivetrain: Drivetrain;
}

/** The supply's resting voltage when nothing was measured: the bench supply's setting or a charged pack. */
export function defaultSupplyVoltage(rig: Pick<RigSpec, 'supply'>): number {
  return rig.supply.voltage_v ?? (rig.supply.cells ?? 0) * PACK_CELL_VOLTAGE;
}

/**
 * The same model on another supply resting voltage (measured, or given): nothing aerodynamic is solved
 * again, so the daemon can follow a pack as it drains.
 */
export function withSupplyVoltage(model: RigModel, openCircuit_v: number): RigModel {
  if (!(Number.isFinite(openCircuit_v) && openCircuit_v > 0)) {
    throw new RangeError(`openCircuit_v: must be a positive number of volts (got ${openCircuit_v})`);
  }
  const d = model.drivetrain;
  return { ...model, drivetrain: { ...d, supply: { ...d.supply, openCircuit_v } } };
}

/** Build the evaluable model of a validated rig. */
export function buildRigModel(rig: RigSpec, opts: ModelOptions = {}): RigModel {
  const air = opts.air ?? SEA_LEVEL_AIR;
  const geometry = rigGeometry(rig);
  const duct = rig.duct ? ductCondition(rig.duct, rig.propeller.diameter_m, opts.ductLosses) : null;
  const wantTable = opts.propellerSource ?? 'auto';
  if (wantTable === 'table' && (!rig.propeller.static_table || rig.duct)) {
    throw new RangeError('propellerSource: "table" needs an open rig whose propeller has a static_table');
  }
  const useTable = wantTable !== 'bemt' && !!rig.propeller.static_table && !rig.duct;
  let rotor: BemtRotor | null = null;
  let load: PropellerLoad;
  if (useTable) {
    load = tableLoad(rig.propeller.static_table!, rig.propeller.diameter_m, air);
  } else {
    const inflow: InflowModel = duct
      ? { kind: 'ducted', sigmaEffective: duct.sigmaEffective, tipLossWeight: duct.tipLossWeight, lossCoefficient: duct.lossCoefficientEquivalent }
      : { kind: 'open' };
    const r = prepareRotor(bladeFromPropeller(rig.propeller), inflow, {
      stations: opts.stations,
      tipLoss: opts.tipLoss,
      polar: opts.polar,
      factors: opts.factors,
    });
    rotor = r;
    load = {
      thrustAt: (w) => rotorAt(r, w, air).thrust_N,
      torqueAt: (w) => rotorAt(r, w, air).torque_Nm,
      omegaForThrust: (t) => omegaForThrust(r, t, air),
    };
  }
  const s = rig.supply;
  const openCircuit_v = opts.openCircuitVoltage_v ?? defaultSupplyVoltage(rig);
  if (!(Number.isFinite(openCircuit_v) && openCircuit_v > 0)) {
    throw new RangeError(`openCircuitVoltage_v: must be a positive number of volts (got ${openCircuit_v})`);
  }
  const drivetrain: Drivetrain = {
    motor: {
      kv_rpm_per_v: rig.motor.kv_rpm_per_v,
      resistance_ohm: opts.motor?.resistance_ohm ?? rig.motor.resistance_ohm,
      noLoadCurrent_a: opts.motor?.noLoadCurrent_a ?? rig.motor.no_load_current_a,
      noLoadVoltage_v: rig.motor.no_load_voltage_v,
      noLoadCurrentExponent: opts.motor?.noLoadCurrentExponent ?? 0,
    },
    esc: { efficiency: rig.esc.efficiency, resistance_ohm: rig.esc.resistance_ohm, throttleOffset: opts.esc?.throttleOffset ?? 0 },
    supply: { openCircuit_v, internalResistance_ohm: s.internal_resistance_ohm },
  };
  return { rig, air, geometry, duct, rotor, source: useTable ? 'table' : 'bemt', load, drivetrain };
}

export interface IdealReference {
  thrust_N: number;
  idealPowerOpen_W: number;
  /** Ideal ducted power at the duct's geometric sigma; null for an open rig. */
  idealPowerDucted_W: number | null;
  /** Thrust in gram-force per ideal watt (open rotor). */
  idealGramsPerWattOpen: number;
  idealGramsPerWattDucted: number | null;
}

/** Momentum-theory reference at a thrust, for a rotor diameter and (optionally) a duct's sigma. */
export function idealReference(thrust_N: number, diameter_m: number, density: number, sigma: number | null): IdealReference {
  const A = diskArea(diameter_m);
  const po = idealPowerOpen(thrust_N, density, A);
  const pd = sigma === null ? null : idealPowerDucted(thrust_N, density, A, sigma);
  const gf = newtonsToGramForce(thrust_N);
  return {
    thrust_N,
    idealPowerOpen_W: po,
    idealPowerDucted_W: pd,
    idealGramsPerWattOpen: po > 0 ? gf / po : Number.POSITIVE_INFINITY,
    idealGramsPerWattDucted: pd === null ? null : pd > 0 ? gf / pd : Number.POSITIVE_INFINITY,
  };
}

export interface PredictedPoint extends OperatingPoint, IdealReference {
  /** Open-form figure of merit on shaft power. */
  figureOfMerit: number;
  /** Shrouded-form figure of merit (ducted rigs), else null. */
  figureOfMeritShrouded: number | null;
  /** Thrust on the rotor blades, N (all of it for an open rig). */
  rotorThrust_N: number;
  /** Thrust on the duct (inlet-lip suction net of the diffuser wall), N; null for an open rig. */
  lipThrust_N: number | null;
}

function decorate(model: RigModel, op: OperatingPoint): PredictedPoint {
  const rho = model.air.density_kg_m3;
  const sigma = model.geometry.sigma;
  const ref = idealReference(op.thrust_N, model.rig.propeller.diameter_m, rho, sigma);
  const A = model.geometry.diskArea_m2;
  const fm = op.powerShaft_W > 0 ? figureOfMeritOpen(op.thrust_N, op.powerShaft_W, rho, A) : 0;
  const fms =
    sigma === null ? null : op.powerShaft_W > 0 ? figureOfMeritShrouded(op.thrust_N, op.powerShaft_W, rho, A, sigma) : 0;
  const rotorShare = model.duct ? model.duct.rotorThrustShare : 1;
  return {
    ...op,
    ...ref,
    figureOfMerit: fm,
    figureOfMeritShrouded: fms,
    rotorThrust_N: op.thrust_N * rotorShare,
    lipThrust_N: model.duct ? op.thrust_N * (1 - rotorShare) : null,
  };
}

/** Prediction at one throttle (and optionally a measured bus voltage). */
export function predictAtThrottle(model: RigModel, throttle: number, busVoltage_V?: number): PredictedPoint {
  return decorate(model, solveOperatingPoint(model.drivetrain, model.load, throttle, busVoltage_V));
}

export interface PredictionCurve {
  rig: string;
  density_kg_m3: number;
  points: PredictedPoint[];
}

/**
 * Curve over throttle: either the given throttles or `points` evenly spaced throttles 1/N .. 1 (zero is left
 * out: nothing spins there). Default 20 points.
 */
export function predictCurve(model: RigModel, opts: { throttles?: number[]; points?: number; busVoltage_V?: number } = {}): PredictionCurve {
  let throttles = opts.throttles;
  if (!throttles) {
    const n = opts.points ?? 20;
    if (!Number.isInteger(n) || n < 1 || n > 10000) throw new RangeError('points: must be a whole number within 1..10000');
    throttles = Array.from({ length: n }, (_, i) => (i + 1) / n);
  }
  return {
    rig: model.rig.name,
    density_kg_m3: model.air.density_kg_m3,
    points: throttles.map((d) => predictAtThrottle(model, d, opts.busVoltage_V)),
  };
}

export interface ThrustPrediction extends IdealReference {
  /** The operating point making this thrust, or null when it is out of reach at full throttle. */
  operating: PredictedPoint | null;
}

/** Predictions at given thrusts (the throttle is solved for). */
export function predictAtThrusts(model: RigModel, thrusts: readonly number[], busVoltage_V?: number): ThrustPrediction[] {
  return thrusts.map((t) => {
    const op = operatingPointForThrust(model.drivetrain, model.load, t, busVoltage_V);
    const ref = idealReference(t, model.rig.propeller.diameter_m, model.air.density_kg_m3, model.geometry.sigma);
    return { ...ref, operating: op ? decorate(model, op) : null };
  });
}

/** A measured operating point from the bench. */
export interface MeasuredPoint {
  throttle: number;
  /** Bus voltage at the ESC input, V. */
  busVoltage_V: number;
  thrust_N: number;
  /** Electrical power; if absent, busVoltage_V * current_A. */
  power_W?: number;
  current_A?: number;
  rpm?: number;
}

/** Electrical power of a measured point (from power, or voltage times current). */
export function measuredPower(p: MeasuredPoint): number | undefined {
  if (p.power_W !== undefined) return p.power_W;
  if (p.current_A !== undefined) return p.busVoltage_V * p.current_A;
  return undefined;
}

export interface Deviation {
  predicted: PredictedPoint;
  /** (measured - predicted) / predicted in %, at the same throttle and bus voltage; null where not measured. */
  percent: {
    thrust: number;
    power: number | null;
    current: number | null;
    rpm: number | null;
    gramsPerWatt: number | null;
  };
  /** Grams per watt measured versus predicted at the measured thrust, %; null if unreachable or unmeasured. */
  gramsPerWattAtEqualThrust: number | null;
}

function pct(measured: number, predicted: number): number {
  return predicted !== 0 ? ((measured - predicted) / predicted) * 100 : measured === 0 ? 0 : Number.POSITIVE_INFINITY;
}

/** Deviation of a measured point from the prediction at the same throttle and bus voltage. */
export function deviation(model: RigModel, m: MeasuredPoint): Deviation {
  const predicted = predictAtThrottle(model, m.throttle, m.busVoltage_V);
  const power = measuredPower(m);
  const current = m.current_A ?? (m.power_W !== undefined ? m.power_W / m.busVoltage_V : undefined);
  const gpw = power !== undefined && power > 0 ? newtonsToGramForce(m.thrust_N) / power : undefined;
  let atThrust: number | null = null;
  if (gpw !== undefined && m.thrust_N > 0) {
    const op = operatingPointForThrust(model.drivetrain, model.load, m.thrust_N, m.busVoltage_V);
    if (op && op.gramsPerWatt > 0) atThrust = pct(gpw, op.gramsPerWatt);
  }
  return {
    predicted,
    percent: {
      thrust: pct(m.thrust_N, predicted.thrust_N),
      power: power === undefined ? null : pct(power, predicted.powerElectrical_W),
      current: current === undefined ? null : pct(current, predicted.current_A),
      rpm: m.rpm === undefined ? null : pct(m.rpm, predicted.rpm),
      gramsPerWatt: gpw === undefined ? null : pct(gpw, predicted.gramsPerWatt),
    },
    gramsPerWattAtEqualThrust: atThrust,
  };
}
