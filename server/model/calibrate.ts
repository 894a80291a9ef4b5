// Calibration: fit the model's free factors to measured operating points, and judge a duct against the open
// propeller from measurements alone.
//
// The fit is Levenberg-Marquardt on weighted residuals with a forward-difference Jacobian. Each measured
// point is predicted at its own throttle and measured bus voltage (so supply sag is not a fitted quantity) and
// compared in thrust, electrical power and, where measured, rpm. Residuals are divided by a noise scale
// rel * |measured| + abs per quantity, so that newtons, watts and rpm can share one sum of squares; the
// default assumes 1 % relative noise on each. Parameter standard uncertainties come from the covariance
// (J^T J)^-1 s^2 with s^2 = SSR / (m - n), which is honest only if the noise scales are about right.
//
// The fit refuses (throws) when there are no more residuals than parameters, and flags the result as
// degenerate when the data cannot separate the parameters: a variance inflation factor (diagonal of the
// inverse of the correlation-scaled J^T J) above 1e6, or a singular J^T J. A sweep at a single speed, for
// example, cannot tell profile drag from induced power, since both only change the torque at that speed.
//
// Besides the aerodynamic factors and the motor constants, two parameters describe parts a rig file cannot:
// the ESC's throttle offset (motor.ts; it shows in an open sweep as rpm falling short at low throttle) and the
// duct-loss coefficients (duct-losses.ts: shroudRealisation, tipGapLoss, lipLoss, diffuserRealisation). Those
// only move a ducted rig, so they are fitted on ducted points with the open sweep's factors held (pass them as
// `model`); on an open rig the fit reports them as degenerate.

import { G0, newtonsToGramForce } from './constants.js';
import { invertSymmetric, solveLinear } from './numeric.js';
import { buildRigModel, measuredPower, predictAtThrottle, type MeasuredPoint, type ModelOptions, type RigModel } from './predict.js';
import { idealPowerRatio, idealThrustRatio } from './momentum.js';
import { DEFAULT_DUCT_LOSSES, DUCT_LOSS_RANGES } from './duct-losses.js';
import type { RigSpec } from './rig-types.js';

export type FitParameter =
  | 'liftFactor'
  | 'cd0Factor'
  | 'inducedFactor'
  | 'motorResistance'
  | 'motorNoLoadCurrent'
  | 'escThrottleOffset'
  | 'shroudRealisation'
  | 'tipGapLoss'
  | 'lipLoss'
  | 'diffuserRealisation';

export const FIT_PARAMETERS: readonly FitParameter[] = [
  'liftFactor',
  'cd0Factor',
  'inducedFactor',
  'motorResistance',
  'motorNoLoadCurrent',
  'escThrottleOffset',
  'shroudRealisation',
  'tipGapLoss',
  'lipLoss',
  'diffuserRealisation',
];

const BOUNDS: Record<FitParameter, [number, number]> = {
  liftFactor: [0.2, 5],
  cd0Factor: [0.05, 20],
  inducedFactor: [0.2, 5],
  motorResistance: [1e-4, 20],
  motorNoLoadCurrent: [0, 50],
  escThrottleOffset: [0, 0.3],
  shroudRealisation: DUCT_LOSS_RANGES.shroudRealisation as [number, number],
  tipGapLoss: DUCT_LOSS_RANGES.tipGapLoss as [number, number],
  lipLoss: DUCT_LOSS_RANGES.lipLoss as [number, number],
  diffuserRealisation: DUCT_LOSS_RANGES.diffuserRealisation as [number, number],
};

export class CalibrationError extends Error {
  override readonly name = 'CalibrationError';
}

export interface NoiseScale {
  rel: number;
  abs: number;
}

export interface CalibrationOptions {
  /** Parameters to fit; default liftFactor, cd0Factor, inducedFactor. */
  parameters?: FitParameter[];
  /** Starting values (default: 1 for factors, the rig's values for the motor). */
  initial?: Partial<Record<FitParameter, number>>;
  /** Options of the model being fitted (air, polar, stations...); fitted values override its factors. */
  model?: ModelOptions;
  noise?: Partial<Record<'thrust' | 'power' | 'rpm', Partial<NoiseScale>>>;
  maxIterations?: number;
}

export interface CalibrationResult {
  names: FitParameter[];
  parameters: Partial<Record<FitParameter, number>>;
  /** Standard uncertainties from the covariance; Infinity where the fit is degenerate and singular. */
  uncertainties: Partial<Record<FitParameter, number>>;
  correlation: number[][];
  /** Per point (measured - predicted) / predicted in %; null where the quantity was not measured. */
  residualsPercent: { thrust: number[]; power: (number | null)[]; rpm: (number | null)[] };
  /** Noise-scaled residuals as fitted. */
  residuals: number[];
  /** Root mean square of the noise-scaled residuals (about 1 when the noise scales are right). */
  rms: number;
  /** Root mean square of the percentage residuals, per quantity (null when unmeasured). */
  rmsPercent: { thrust: number; power: number | null; rpm: number | null };
  /** s^2 = SSR / (m - n). */
  residualVariance: number;
  degreesOfFreedom: number;
  iterations: number;
  converged: boolean;
  degenerate: boolean;
  degenerateReason: string | null;
  /** Model options with the fitted values applied: buildRigModel(rig, result.modelOptions). */
  modelOptions: ModelOptions;
}

/** Model options with the named parameters set to p (the fit's own mapping, for propagating its covariance). */
export function applyParams(base: ModelOptions, names: readonly FitParameter[], p: readonly number[]): ModelOptions {
  const factors = { ...base.factors };
  const motor = { ...base.motor };
  const esc = { ...base.esc };
  const ductLosses = { ...base.ductLosses };
  names.forEach((name, j) => {
    const v = p[j];
    switch (name) {
      case 'liftFactor':
      case 'cd0Factor':
      case 'inducedFactor':
        factors[name] = v;
        break;
      case 'motorResistance':
        motor.resistance_ohm = v;
        break;
      case 'motorNoLoadCurrent':
        motor.noLoadCurrent_a = v;
        break;
      case 'escThrottleOffset':
        esc.throttleOffset = v;
        break;
      case 'shroudRealisation':
      case 'tipGapLoss':
      case 'lipLoss':
      case 'diffuserRealisation':
        ductLosses[name] = v;
        break;
    }
  });
  return { ...base, factors, motor, esc, ductLosses };
}

function initialValue(rig: RigSpec, base: ModelOptions, name: FitParameter): number {
  switch (name) {
    case 'liftFactor':
    case 'cd0Factor':
    case 'inducedFactor':
      return base.factors?.[name] ?? 1;
    case 'motorResistance':
      return base.motor?.resistance_ohm ?? rig.motor.resistance_ohm;
    case 'motorNoLoadCurrent':
      return base.motor?.noLoadCurrent_a ?? rig.motor.no_load_current_a;
    case 'escThrottleOffset':
      return base.esc?.throttleOffset ?? 0;
    case 'shroudRealisation':
    case 'tipGapLoss':
    case 'lipLoss':
    case 'diffuserRealisation':
      return base.ductLosses?.[name] ?? DEFAULT_DUCT_LOSSES[name];
  }
}

function checkPoints(points: readonly MeasuredPoint[]): void {
  points.forEach((pt, i) => {
    const bad = (field: string, rule: string): never => {
      throw new CalibrationError(`points[${i}].${field}: ${rule}`);
    };
    if (!(Number.isFinite(pt.throttle) && pt.throttle > 0 && pt.throttle <= 1)) bad('throttle', 'must be within 0..1 and above 0');
    if (!(Number.isFinite(pt.busVoltage_V) && pt.busVoltage_V > 0)) bad('busVoltage_V', 'must be a positive number');
    if (!(Number.isFinite(pt.thrust_N) && pt.thrust_N >= 0)) bad('thrust_N', 'must be a non-negative number');
    const pw = measuredPower(pt);
    if (pw !== undefined && !(Number.isFinite(pw) && pw > 0)) bad('power_W', 'must be a positive number');
    if (pt.rpm !== undefined && !(Number.isFinite(pt.rpm) && pt.rpm >= 0)) bad('rpm', 'must be a non-negative number');
  });
}

const DEFAULT_NOISE: Record<'thrust' | 'power' | 'rpm', NoiseScale> = {
  thrust: { rel: 0.01, abs: 0.005 },
  power: { rel: 0.01, abs: 0.1 },
  rpm: { rel: 0.01, abs: 10 },
};

/** Fit free model parameters to measured points of one rig. */
export function calibrate(rig: RigSpec, points: readonly MeasuredPoint[], opts: CalibrationOptions = {}): CalibrationResult {
  const names = [...(opts.parameters ?? (['liftFactor', 'cd0Factor', 'inducedFactor'] as FitParameter[]))];
  if (names.length === 0) throw new CalibrationError('parameters: at least one parameter must be fitted');
  for (const n of names) if (!FIT_PARAMETERS.includes(n)) throw new CalibrationError(`parameters: unknown parameter "${n}"`);
  if (new Set(names).size !== names.length) throw new CalibrationError('parameters: each parameter at most once');
  checkPoints(points);
  const base: ModelOptions = { ...opts.model, propellerSource: 'bemt' };
  const noise = {
    thrust: { ...DEFAULT_NOISE.thrust, ...opts.noise?.thrust },
    power: { ...DEFAULT_NOISE.power, ...opts.noise?.power },
    rpm: { ...DEFAULT_NOISE.rpm, ...opts.noise?.rpm },
  };
  const powers = points.map(measuredPower);
  const m = points.length + powers.filter((p) => p !== undefined).length + points.filter((p) => p.rpm !== undefined).length;
  const n = names.length;
  if (m <= n) {
    throw new CalibrationError(`points: ${m} measured values cannot determine ${n} parameters; measure more operating points`);
  }

  const scale = (q: NoiseScale, v: number): number => q.rel * Math.abs(v) + q.abs;
  const residualsFor = (p: readonly number[]): number[] => {
    const model = buildRigModel(rig, applyParams(base, names, p));
    const r: number[] = [];
    points.forEach((pt, i) => {
      const pred = predictAtThrottle(model, pt.throttle, pt.busVoltage_V);
      r.push((pred.thrust_N - pt.thrust_N) / scale(noise.thrust, pt.thrust_N));
      const pw = powers[i];
      if (pw !== undefined) r.push((pred.powerElectrical_W - pw) / scale(noise.power, pw));
      if (pt.rpm !== undefined) r.push((pred.rpm - pt.rpm) / scale(noise.rpm, pt.rpm));
    });
    return r;
  };
  const clamp = (p: number[]): number[] => p.map((v, j) => Math.min(BOUNDS[names[j]][1], Math.max(BOUNDS[names[j]][0], v)));
  const sumSq = (r: readonly number[]): number => r.reduce((s, x) => s + x * x, 0);
  const jacobian = (p: readonly number[], r0: readonly number[]): number[][] => {
    const J = r0.map(() => new Array<number>(n).fill(0));
    for (let j = 0; j < n; j++) {
      const typical = names[j] === 'motorResistance' ? 0.01 : names[j] === 'escThrottleOffset' ? 0.01 : 0.1;
      let h = 1e-5 * Math.max(Math.abs(p[j]), typical);
      // Step inwards at an upper bound so the perturbed point stays inside the model's domain.
      if (p[j] + h > BOUNDS[names[j]][1]) h = -h;
      const q = [...p];
      q[j] += h;
      const r1 = residualsFor(q);
      for (let i = 0; i < r0.length; i++) J[i][j] = (r1[i] - r0[i]) / h;
    }
    return J;
  };
  const normalEquations = (J: number[][], r: readonly number[]): { A: number[][]; g: number[] } => {
    const A = Array.from({ length: n }, () => new Array<number>(n).fill(0));
    const g = new Array<number>(n).fill(0);
    for (let i = 0; i < J.length; i++) {
      for (let a = 0; a < n; a++) {
        g[a] += J[i][a] * r[i];
        for (let b = a; b < n; b++) A[a][b] += J[i][a] * J[i][b];
      }
    }
    for (let a = 0; a < n; a++) for (let b = 0; b < a; b++) A[a][b] = A[b][a];
    return { A, g };
  };

  let p = clamp(names.map((name) => opts.initial?.[name] ?? initialValue(rig, base, name)));
  let r = residualsFor(p);
  let cost = sumSq(r);
  if (!Number.isFinite(cost)) throw new CalibrationError('initial: the model cannot reproduce these points at the starting values');
  let lambda = 1e-3;
  let converged = false;
  let iterations = 0;
  const maxIter = opts.maxIterations ?? 50;
  for (; iterations < maxIter && !converged; iterations++) {
    const J = jacobian(p, r);
    const { A, g } = normalEquations(J, r);
    const maxDiag = Math.max(...A.map((row, i) => row[i]), 1e-300);
    let accepted = false;
    while (lambda < 1e12) {
      const M = A.map((row, i) => row.map((v, j) => (i === j ? v + lambda * Math.max(v, 1e-9 * maxDiag) : v)));
      const delta = solveLinear(M, g.map((x) => -x));
      if (!delta) {
        lambda *= 10;
        continue;
      }
      const pNew = clamp(p.map((v, j) => v + delta[j]));
      const rNew = residualsFor(pNew);
      const costNew = sumSq(rNew);
      if (Number.isFinite(costNew) && costNew <= cost) {
        const stepSmall = pNew.every((v, j) => Math.abs(v - p[j]) <= 1e-9 * Math.max(Math.abs(p[j]), 1e-6));
        const costFlat = cost - costNew <= 1e-12 * Math.max(cost, 1e-30);
        p = pNew;
        r = rNew;
        cost = costNew;
        lambda = Math.max(lambda / 3, 1e-9);
        accepted = true;
        if (stepSmall || costFlat) converged = true;
        break;
      }
      lambda *= 4;
    }
    if (!accepted) {
      // No step lowers the cost: at the minimum to within the Jacobian's accuracy.
      converged = true;
    }
  }

  const dof = m - n;
  const s2 = cost / dof;
  const J = jacobian(p, r);
  const { A } = normalEquations(J, r);
  const d = A.map((row, i) => Math.sqrt(row[i]));
  let degenerate = false;
  let degenerateReason: string | null = null;
  const uncertainties: Partial<Record<FitParameter, number>> = {};
  let correlation: number[][] = names.map((_, i) => names.map((__, j) => (i === j ? 1 : Number.NaN)));
  const insensitive = names.filter((_, j) => !(d[j] > 0));
  if (insensitive.length > 0) {
    degenerate = true;
    degenerateReason = `the data do not depend on ${insensitive.join(', ')}`;
    names.forEach((name) => (uncertainties[name] = Number.POSITIVE_INFINITY));
  } else {
    const N = A.map((row, i) => row.map((v, j) => v / (d[i] * d[j])));
    const Ninv = invertSymmetric(N, 1e-14);
    if (!Ninv) {
      degenerate = true;
      degenerateReason = `the data cannot separate ${names.join(', ')} (singular normal matrix)`;
      names.forEach((name) => (uncertainties[name] = Number.POSITIVE_INFINITY));
    } else {
      const vif = names.map((_, j) => Ninv[j][j]);
      const bad = names.filter((_, j) => !(vif[j] < 1e6));
      if (bad.length > 0) {
        degenerate = true;
        degenerateReason = `the data cannot separate ${bad.join(', ')} (variance inflation ${Math.max(...vif).toExponential(1)})`;
      }
      names.forEach((name, j) => (uncertainties[name] = Math.sqrt((Math.max(0, Ninv[j][j]) * s2)) / d[j]));
      correlation = names.map((_, i) => names.map((__, j) => Ninv[i][j] / Math.sqrt(Ninv[i][i] * Ninv[j][j])));
    }
  }

  const modelOptions = applyParams(base, names, p);
  const model = buildRigModel(rig, modelOptions);
  const thrustPct: number[] = [];
  const powerPct: (number | null)[] = [];
  const rpmPct: (number | null)[] = [];
  points.forEach((pt, i) => {
    const pred = predictAtThrottle(model, pt.throttle, pt.busVoltage_V);
    const rel = (meas: number, pr: number): number => (pr !== 0 ? ((meas - pr) / pr) * 100 : 0);
    thrustPct.push(rel(pt.thrust_N, pred.thrust_N));
    const pw = powers[i];
    powerPct.push(pw === undefined ? null : rel(pw, pred.powerElectrical_W));
    rpmPct.push(pt.rpm === undefined ? null : rel(pt.rpm, pred.rpm));
  });
  const rmsOf = (xs: (number | null)[]): number | null => {
    const v = xs.filter((x): x is number => x !== null);
    return v.length === 0 ? null : Math.sqrt(v.reduce((s, x) => s + x * x, 0) / v.length);
  };
  const parameters: Partial<Record<FitParameter, number>> = {};
  names.forEach((name, j) => (parameters[name] = p[j]));
  return {
    names,
    parameters,
    uncertainties,
    correlation,
    residualsPercent: { thrust: thrustPct, power: powerPct, rpm: rpmPct },
    residuals: r,
    rms: Math.sqrt(cost / m),
    rmsPercent: { thrust: rmsOf(thrustPct) as number, power: rmsOf(powerPct), rpm: rmsOf(rpmPct) },
    residualVariance: s2,
    degreesOfFreedom: dof,
    iterations,
    converged,
    degenerate,
    degenerateReason,
    modelOptions,
  };
}

/**
 * The main workflow: calibrate the propeller and motor on an open sweep, then predict the ducted rig built
 * from the same propeller and motor. Refuses rigs that do not share them.
 */
export function fitOpenPredictDuct(
  openRig: RigSpec,
  ductRig: RigSpec,
  openPoints: readonly MeasuredPoint[],
  opts: CalibrationOptions = {},
): { fit: CalibrationResult; openModel: RigModel; ductModel: RigModel } {
  if (openRig.duct !== null) throw new CalibrationError('openRig.duct: must be null (fit on the open propeller)');
  if (ductRig.duct === null) throw new CalibrationError('ductRig.duct: must describe a duct');
  const same = (a: number, b: number): boolean => Math.abs(a - b) <= 1e-9 * Math.max(Math.abs(a), Math.abs(b));
  const pa = openRig.propeller;
  const pb = ductRig.propeller;
  if (!same(pa.diameter_m, pb.diameter_m) || !same(pa.pitch_m, pb.pitch_m) || pa.blades !== pb.blades) {
    throw new CalibrationError('ductRig.propeller: must be the same propeller as openRig.propeller');
  }
  if (!same(openRig.motor.kv_rpm_per_v, ductRig.motor.kv_rpm_per_v)) {
    throw new CalibrationError('ductRig.motor: must be the same motor as openRig.motor');
  }
  const fit = calibrate(openRig, openPoints, opts);
  return { fit, openModel: buildRigModel(openRig, fit.modelOptions), ductModel: buildRigModel(ductRig, fit.modelOptions) };
}

/** A measured point reduced to what the duct comparison needs. */
export interface PerformancePoint {
  thrust_N: number;
  power_W: number;
}

export interface DuctEffectivenessLevel {
  thrust_N: number;
  powerOpen_W: number;
  powerDuct_W: number;
  /** 1 - P_duct / P_open at this thrust. */
  powerSaving: number;
  /** powerSaving / ideal saving. */
  effectiveness: number;
}

export interface DuctEffectiveness {
  sigma: number;
  /** Ideal power saving at equal thrust, 1 - 1 / sqrt(2 sigma). */
  idealPowerSaving: number;
  /** Mean measured power saving at equal thrust over the overlapping thrust range. */
  powerSaving: number;
  /** powerSaving / idealPowerSaving (above 1 happens: the duct also cuts non-ideal losses). */
  effectiveness: number;
  levels: DuctEffectivenessLevel[];
  /** Ideal thrust gain at equal power, (2 sigma)^(1/3) - 1. */
  idealThrustGain: number;
  /** Mean measured T_duct / T_open - 1 at equal electrical power. */
  thrustGain: number;
  /** The same, with the duct's weight taken off the ducted thrust. */
  netThrustGain: number;
  ductWeight_N: number;
  /** Whether the duct adds more thrust than it weighs (netThrustGain > 0). */
  paysForItsWeight: boolean;
}

interface Curve {
  xs: number[];
  ys: number[];
}

/** Log-log curve of y against x from points sorted by x (power laws are straight lines there). */
function logCurve(xs: number[], ys: number[]): Curve {
  const order = xs.map((_, i) => i).sort((a, b) => xs[a] - xs[b]);
  return { xs: order.map((i) => Math.log(xs[i])), ys: order.map((i) => Math.log(ys[i])) };
}

function evalLog(c: Curve, x: number): number {
  const lx = Math.log(x);
  const n = c.xs.length;
  let i = 1;
  while (i < n - 1 && c.xs[i] < lx) i++;
  const t = (lx - c.xs[i - 1]) / (c.xs[i] - c.xs[i - 1]);
  return Math.exp(c.ys[i - 1] + t * (c.ys[i] - c.ys[i - 1]));
}

function checkPerformance(name: string, pts: readonly PerformancePoint[]): PerformancePoint[] {
  const ok = pts.filter((p) => p.thrust_N > 0 && p.power_W > 0 && Number.isFinite(p.thrust_N) && Number.isFinite(p.power_W));
  const distinct = new Set(ok.map((p) => p.thrust_N)).size;
  if (distinct < 2) throw new CalibrationError(`${name}: needs at least 2 points with distinct positive thrust and power`);
  return ok;
}

/**
 * Duct effectiveness from measurements: the power a duct saves at equal thrust against what ideal momentum
 * theory promises for its sigma, and the thrust it adds at equal power, with and without its own weight.
 * Both sweeps are interpolated in log-log (thrust grows near power^(2/3)) over the range they share; levels
 * are spaced geometrically across it. Electrical power is compared, so motor efficiency at the two loads is
 * part of the measured saving.
 */
export function ductEffectiveness(
  openPoints: readonly PerformancePoint[],
  ductPoints: readonly PerformancePoint[],
  opts: { sigma: number; ductMass_kg?: number; levels?: number },
): DuctEffectiveness {
  const sigma = opts.sigma;
  if (!(Number.isFinite(sigma) && sigma > 0.5)) throw new CalibrationError('sigma: must be a finite number above 0.5');
  const mass = opts.ductMass_kg ?? 0;
  if (!(Number.isFinite(mass) && mass >= 0)) throw new CalibrationError('ductMass_kg: must not be negative');
  const nLevels = opts.levels ?? 8;
  const open = checkPerformance('openPoints', openPoints);
  const duct = checkPerformance('ductPoints', ductPoints);
  const po = logCurve(open.map((p) => p.thrust_N), open.map((p) => p.power_W));
  const pd = logCurve(duct.map((p) => p.thrust_N), duct.map((p) => p.power_W));
  const to = logCurve(open.map((p) => p.power_W), open.map((p) => p.thrust_N));
  const td = logCurve(duct.map((p) => p.power_W), duct.map((p) => p.thrust_N));

  const span = (a: Curve, b: Curve): [number, number] | null => {
    const lo = Math.max(a.xs[0], b.xs[0]);
    const hi = Math.min(a.xs[a.xs.length - 1], b.xs[b.xs.length - 1]);
    return hi > lo ? [lo, hi] : null;
  };
  const grid = (s: [number, number]): number[] =>
    Array.from({ length: nLevels }, (_, k) => Math.exp(s[0] + ((s[1] - s[0]) * (k + 0.5)) / nLevels));
  const thrustSpan = span(po, pd);
  if (!thrustSpan) throw new CalibrationError('ductPoints: thrust range does not overlap the open sweep');
  const powerSpan = span(to, td);
  if (!powerSpan) throw new CalibrationError('ductPoints: power range does not overlap the open sweep');

  const idealSaving = 1 - idealPowerRatio(sigma);
  const levels = grid(thrustSpan).map((t) => {
    const a = evalLog(po, t);
    const b = evalLog(pd, t);
    const saving = 1 - b / a;
    return { thrust_N: t, powerOpen_W: a, powerDuct_W: b, powerSaving: saving, effectiveness: saving / idealSaving };
  });
  const weight = mass * G0;
  let gain = 0;
  let netGain = 0;
  const powers = grid(powerSpan);
  for (const p of powers) {
    const a = evalLog(to, p);
    const b = evalLog(td, p);
    gain += b / a - 1;
    netGain += (b - weight) / a - 1;
  }
  gain /= powers.length;
  netGain /= powers.length;
  const saving = levels.reduce((s, l) => s + l.powerSaving, 0) / levels.length;
  return {
    sigma,
    idealPowerSaving: idealSaving,
    powerSaving: saving,
    effectiveness: saving / idealSaving,
    levels,
    idealThrustGain: idealThrustRatio(sigma) - 1,
    thrustGain: gain,
    netThrustGain: netGain,
    ductWeight_N: weight,
    paysForItsWeight: netGain > 0,
  };
}

/** Grams-force per watt of a measured point (for tables next to the fit). */
export function measuredGramsPerWatt(p: PerformancePoint): number {
  return p.power_W > 0 ? newtonsToGramForce(p.thrust_N) / p.power_W : 0;
}
