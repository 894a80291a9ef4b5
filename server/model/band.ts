// The prediction's uncertainty, as a band on thrust per watt. Pure: numbers in, numbers out.
//
// Before the model has been calibrated on an open sweep of this propeller and motor, the band is a stated
// spread: PRIOR_GPW_SPREAD, the relative standard uncertainty of the predicted thrust per watt. A blade-element
// model with generic low-Reynolds airfoil data and a first-order motor model predicts a small propeller's static
// thrust and power each to within about 10 to 15 %, the two errors partly cancelling in their ratio (from
// memory, measured small-propeller data such as Brandt and Selig, AIAA 2011-1255, against such models), so
// 10 % (one standard uncertainty) on thrust per watt, and the band drawn at BAND_K = 2 standard uncertainties
// (about 95 % coverage for a normal error), is 20 % either side.
//
// Once calibrated (calibrate.ts, Levenberg-Marquardt with the parameter covariance), the band follows from the
// fit: the parameter covariance C (standard uncertainties and correlations) propagated to thrust per watt at each
// throttle through the model's own sensitivities (forward differences, J C J^T), plus, in quadrature, the
// scatter of the fitted points about the fitted curve (the rms of their percentage residuals in thrust and
// power), which is what the parameters alone cannot explain. A fit the data could not pin down (degenerate) gives
// no band of its own and is not used.
//
// Both bands also carry what the comparison's measured side cannot know better than its zeros: the current
// sensor's zero (an uncalibrated Hall sensor reads a tenth of an ampere or more with nothing flowing, a few
// watts on a 4-cell pack, most of the power at the first steps of a staircase) and the thrust zero taken before
// the run. Relative to the predicted power and thrust at each throttle they are large at low throttle and
// negligible higher up, which is where a thrust-per-watt comparison can be trusted.

import { applyParams, type CalibrationResult, type FitParameter } from './calibrate.js';
import { buildRigModel, predictAtThrottle, type ModelOptions, type RigModel } from './predict.js';
import type { RigSpec } from './rig-types.js';

/** Relative standard uncertainty of predicted thrust per watt before any calibration (see above). */
export const PRIOR_GPW_SPREAD = 0.1;
/** The band is drawn and judged at this many standard uncertainties. */
export const BAND_K = 2;

export interface BandSource {
  kind: 'prior' | 'fit';
  /** For people: where the band comes from. */
  text: string;
}

/** Standard uncertainty of the measured side's zeros: the current sensor's (A) and the load cell's (N). */
export interface MeasurementZeros {
  current_A: number;
  thrust_N: number;
}

/**
 * A current sensor whose zero was never calibrated: 0.15 A (Hall sensors read 0.1 to 0.3 A at rest; common
 * practice) and a thrust zero taken at rest before the run, to the cell's noise (0.01 N).
 */
export const UNCALIBRATED_ZEROS: Readonly<MeasurementZeros> = Object.freeze({ current_A: 0.15, thrust_N: 0.01 });
/** A calibrated current zero holds to its own noise and drift over a session, about 0.02 A (common practice). */
export const CALIBRATED_CURRENT_ZERO_A = 0.02;

/** The band at one throttle: predicted thrust per watt and its relative standard uncertainty. */
export interface BandPoint {
  grams_per_watt: number;
  /** Relative standard uncertainty (1 sigma) of grams_per_watt, the sensors' zeros weighed at the predicted power and thrust. */
  rel_sigma: number;
  /** The model's part alone (the stated spread, or the fit's covariance and scatter). */
  rel_model: number;
  /** The zeros' standard uncertainties it was weighed with (the current zero 0 once a fit has taken it in). */
  zeros: MeasurementZeros;
}

/** The parameter covariance of a fit, or null when it is degenerate or not finite. */
export function fitCovariance(fit: CalibrationResult): number[][] | null {
  if (fit.degenerate) return null;
  const u = fit.names.map((n) => fit.uncertainties[n]);
  if (u.some((x) => x === undefined || !Number.isFinite(x))) return null;
  const C = fit.names.map((_, i) => fit.names.map((__, j) => (i === j ? u[i]! ** 2 : u[i]! * u[j]! * fit.correlation[i][j])));
  return C.every((row) => row.every(Number.isFinite)) ? C : null;
}

/** Relative scatter of the fitted points about the fitted curve, in thrust per watt (thrust and power residuals in quadrature). */
export function fitScatter(fit: CalibrationResult): number {
  const t = fit.rmsPercent.thrust ?? 0;
  const p = fit.rmsPercent.power ?? 0;
  return Math.sqrt(t * t + p * p) / 100;
}

/**
 * A band evaluator for a rig: `at(throttle, voltage?)` gives the predicted thrust per watt and its relative
 * standard uncertainty. Without a usable fit, the prior spread. `base` are the model options of the
 * prediction (the air, and the fitted values when `fit` is given: use fit.modelOptions with the air set).
 */
export function bandModel(
  rig: RigSpec,
  base: ModelOptions,
  fit: CalibrationResult | null,
  zeros: MeasurementZeros = UNCALIBRATED_ZEROS,
): { model: RigModel; source: BandSource; at(throttle: number, voltage_V?: number): BandPoint } {
  const model = buildRigModel(rig, base);
  const C = fit ? fitCovariance(fit) : null;
  // A fit of the motor's no-load current on this bench's own readings has taken in the current sensor's
  // constant zero error (it reads as extra no-load current); its uncertainty is in the covariance then.
  const currentZero = fit && C && fit.names.includes('motorNoLoadCurrent') ? 0 : zeros.current_A;
  const used: MeasurementZeros = { current_A: currentZero, thrust_N: zeros.thrust_N };
  const measured = (p: { busVoltage_V: number; powerElectrical_W: number; thrust_N: number }): number =>
    Math.hypot(p.powerElectrical_W > 0 ? (currentZero * p.busVoltage_V) / p.powerElectrical_W : Infinity, p.thrust_N > 0 ? zeros.thrust_N / p.thrust_N : Infinity);
  if (!fit || !C) {
    return {
      model,
      source: { kind: 'prior', text: `stated spread ±${(PRIOR_GPW_SPREAD * BAND_K * 100).toFixed(0)} % (not yet calibrated on an open sweep), with the sensors' zeros` },
      at: (throttle, v) => {
        const p = predictAtThrottle(model, throttle, v);
        return { grams_per_watt: p.gramsPerWatt, rel_sigma: Math.hypot(PRIOR_GPW_SPREAD, measured(p)), rel_model: PRIOR_GPW_SPREAD, zeros: used };
      },
    };
  }
  const names: FitParameter[] = fit.names;
  const p0 = names.map((n) => fit.parameters[n] as number);
  // One model per parameter, nudged by a tenth of its uncertainty (small against the curvature, large
  // against the solver's rounding), for the sensitivities.
  const steps = names.map((n, j) => Math.max(Math.abs(fit.uncertainties[n]!) * 0.1, Math.abs(p0[j]) * 1e-4, 1e-6));
  const nudged = names.map((_, j) => buildRigModel(rig, applyParams(base, names, p0.map((v, k) => (k === j ? v + steps[j] : v)))));
  const scatter = fitScatter(fit);
  return {
    model,
    source: { kind: 'fit', text: `from the calibration on an open sweep (${names.join(', ')}; scatter ${(scatter * 100).toFixed(1)} %)` },
    at(throttle, v) {
      const p = predictAtThrottle(model, throttle, v);
      const g0 = p.gramsPerWatt;
      const J = nudged.map((m, j) => (predictAtThrottle(m, throttle, v).gramsPerWatt - g0) / steps[j]);
      let varG = 0;
      for (let a = 0; a < J.length; a++) for (let b = 0; b < J.length; b++) varG += J[a] * C[a][b] * J[b];
      const rel = g0 > 0 ? Math.sqrt(Math.max(0, varG)) / g0 : Infinity;
      return { grams_per_watt: g0, rel_sigma: Math.hypot(rel, scatter, measured(p)), rel_model: Math.hypot(rel, scatter), zeros: used };
    },
  };
}

/** Lower and upper edge of the band (BAND_K standard uncertainties). */
export function bandEdges(p: BandPoint): { lo: number; hi: number } {
  // Where nothing is predicted (below the ESC's start) or nothing can be said, the band is everything.
  if (!(p.grams_per_watt > 0) || !Number.isFinite(p.rel_sigma)) return { lo: 0, hi: Infinity };
  const h = BAND_K * p.rel_sigma * p.grams_per_watt;
  return { lo: Math.max(0, p.grams_per_watt - h), hi: p.grams_per_watt + h };
}
