import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  buildRigModel,
  calibrate,
  CalibrationError,
  diskArea,
  ductEffectiveness,
  fitOpenPredictDuct,
  idealPowerDucted,
  idealPowerOpen,
  parseRig,
  predictAtThrottle,
  type MeasuredPoint,
  type ModelOptions,
  type RigSpec,
} from '../server/model/index.js';

const rig = (name: string): RigSpec => parseRig(JSON.parse(readFileSync(new URL(`../examples/rigs/${name}`, import.meta.url), 'utf8')));
const openRig = rig('quorrel-open.json');
const ductRig = rig('quorrel-duct.json');

/** Seeded normal deviates (Park-Miller + Box-Muller) so the synthetic noise is the same on every run. */
function gaussian(seed: number): () => number {
  let s = (seed * 7919 + 12345) % 2147483647;
  const u = (): number => {
    s = (s * 16807) % 2147483647;
    return s / 2147483647;
  };
  // Small seeds start Park-Miller with tiny values (a 4-sigma first deviate); let it mix first.
  for (let k = 0; k < 10; k++) u();
  return () => Math.sqrt(-2 * Math.log(u())) * Math.cos(2 * Math.PI * u());
}

/** Synthetic sweep from the model itself with 0.5 % noise on thrust, power and rpm. */
function sweep(r: RigSpec, truth: ModelOptions, seed: number, throttles: number[], sag = 0.08): MeasuredPoint[] {
  const m = buildRigModel(r, truth);
  const g = gaussian(seed);
  return throttles.map((d, k) => {
    const V = 15.6 - sag * k;
    const p = predictAtThrottle(m, d, V);
    return {
      throttle: d,
      busVoltage_V: V,
      thrust_N: p.thrust_N * (1 + 0.005 * g()),
      power_W: p.powerElectrical_W * (1 + 0.005 * g()),
      rpm: p.rpm * (1 + 0.005 * g()),
    };
  });
}

const throttles = Array.from({ length: 14 }, (_, k) => 0.2 + 0.06 * k);
const noise = { thrust: { rel: 0.005, abs: 0 }, power: { rel: 0.005, abs: 0 }, rpm: { rel: 0.005, abs: 0 } };

describe('calibration', () => {
  it('recovers the aerodynamic factors from noisy synthetic data within 3 standard uncertainties', () => {
    const truth = { liftFactor: 1.08, cd0Factor: 1.35, inducedFactor: 1.12 };
    for (const seed of [7, 1234]) {
      const pts = sweep(openRig, { factors: truth }, seed, throttles);
      const fit = calibrate(openRig, pts, { noise });
      expect(fit.converged).toBe(true);
      expect(fit.degenerate).toBe(false);
      for (const name of ['liftFactor', 'cd0Factor', 'inducedFactor'] as const) {
        const u = fit.uncertainties[name]!;
        expect(u).toBeGreaterThan(0);
        expect(Math.abs(fit.parameters[name]! - truth[name])).toBeLessThan(3 * u);
      }
      // The noise scale was right, so the normalised residuals have an RMS near 1.
      expect(fit.rms).toBeGreaterThan(0.5);
      expect(fit.rms).toBeLessThan(1.6);
      expect(fit.rmsPercent.thrust).toBeLessThan(1.5);
    }
  });

  it('recovers the motor resistance and no-load current too', () => {
    const truth = { factors: { liftFactor: 0.95, cd0Factor: 1.2, inducedFactor: 1.05 }, motor: { resistance_ohm: 0.13, noLoadCurrent_a: 0.75 } };
    const pts = sweep(openRig, truth, 99, throttles);
    const fit = calibrate(openRig, pts, {
      noise,
      parameters: ['liftFactor', 'cd0Factor', 'inducedFactor', 'motorResistance', 'motorNoLoadCurrent'],
    });
    expect(fit.degenerate).toBe(false);
    expect(Math.abs(fit.parameters.motorResistance! - 0.13)).toBeLessThan(3 * fit.uncertainties.motorResistance!);
    expect(Math.abs(fit.parameters.motorNoLoadCurrent! - 0.75)).toBeLessThan(3 * fit.uncertainties.motorNoLoadCurrent!);
    expect(Math.abs(fit.parameters.liftFactor! - 0.95)).toBeLessThan(3 * fit.uncertainties.liftFactor!);
  });

  it('flags a degenerate fit: one operating point cannot separate profile drag from induced power', () => {
    const one = sweep(openRig, { factors: { cd0Factor: 1.3 } }, 5, Array.from({ length: 8 }, () => 0.6), 0);
    const fit = calibrate(openRig, one, { parameters: ['cd0Factor', 'inducedFactor'] });
    expect(fit.degenerate).toBe(true);
    expect(fit.degenerateReason).toMatch(/cd0Factor/);
  });

  it('refuses a fit with fewer measured values than parameters', () => {
    const pts: MeasuredPoint[] = [{ throttle: 0.5, busVoltage_V: 15, thrust_N: 4 }];
    expect(() => calibrate(openRig, pts, { parameters: ['liftFactor', 'cd0Factor'] })).toThrow(CalibrationError);
    expect(() => calibrate(openRig, [{ throttle: 1.5, busVoltage_V: 15, thrust_N: 4, power_W: 50 }, ...pts])).toThrow(/points\[0\]\.throttle/);
  });

  it('fit on the open sweep, predict the duct: the prediction matches ducted data from the same truth', () => {
    const truth: ModelOptions = { factors: { liftFactor: 1.05, cd0Factor: 1.4, inducedFactor: 1.1 } };
    const openPts = sweep(openRig, truth, 31, throttles);
    const { fit, ductModel } = fitOpenPredictDuct(openRig, ductRig, openPts, { noise });
    expect(fit.converged).toBe(true);
    const truthDuct = buildRigModel(ductRig, truth);
    for (const d of [0.3, 0.6, 0.9]) {
      const want = predictAtThrottle(truthDuct, d, 15);
      const got = predictAtThrottle(ductModel, d, 15);
      expect(got.thrust_N / want.thrust_N).toBeCloseTo(1, 2);
      expect(got.powerElectrical_W / want.powerElectrical_W).toBeCloseTo(1, 2);
    }
    expect(() => fitOpenPredictDuct(openRig, { ...ductRig, propeller: { ...ductRig.propeller, pitch_m: 0.12 } }, openPts)).toThrow(/same propeller/);
  });
});

describe('calibration of the ESC offset and the shroud realisation', () => {
  it('recovers an ESC throttle offset and the no-load current together with the aerodynamic factors', () => {
    const truth: ModelOptions = { factors: { liftFactor: 1.05, cd0Factor: 1.3, inducedFactor: 1.1 }, esc: { throttleOffset: 0.04 }, motor: { noLoadCurrent_a: 0.45 } };
    const pts = sweep(openRig, truth, 57, throttles);
    const fit = calibrate(openRig, pts, { noise, parameters: ['liftFactor', 'cd0Factor', 'inducedFactor', 'escThrottleOffset', 'motorNoLoadCurrent'] });
    expect(fit.converged).toBe(true);
    expect(fit.degenerate).toBe(false);
    const u = fit.uncertainties.escThrottleOffset!;
    expect(u).toBeGreaterThan(0);
    expect(Math.abs(fit.parameters.escThrottleOffset! - 0.04)).toBeLessThan(3 * u);
    expect(Math.abs(fit.parameters.motorNoLoadCurrent! - 0.45)).toBeLessThan(3 * fit.uncertainties.motorNoLoadCurrent!);
  });

  it('recovers the shroud realisation from ducted points with the open factors held, and calls it degenerate on an open rig', () => {
    const open: ModelOptions = { factors: { liftFactor: 1.05, cd0Factor: 1.3, inducedFactor: 1.1 } };
    const ducted = sweep(ductRig, { ...open, ductLosses: { shroudRealisation: 0.42 } }, 77, throttles);
    const fit = calibrate(ductRig, ducted, { noise, parameters: ['shroudRealisation'], model: open });
    expect(fit.converged).toBe(true);
    expect(Math.abs(fit.parameters.shroudRealisation! - 0.42)).toBeLessThan(3 * fit.uncertainties.shroudRealisation!);
    const onOpen = calibrate(openRig, sweep(openRig, open, 78, throttles), { noise, parameters: ['liftFactor', 'shroudRealisation'] });
    expect(onOpen.degenerate).toBe(true);
    expect(onOpen.degenerateReason).toMatch(/shroudRealisation/);
  });
});

describe('duct effectiveness from measurements', () => {
  const A = diskArea(0.254);
  const rho = 1.2;
  const thrusts = [1, 2, 3, 5, 8, 12];

  it('an ideal duct scores 1: saving 1 - 1/sqrt(2 sigma), thrust gain (2 sigma)^(1/3) - 1', () => {
    // Momentum theory ratios (../shared/CHECKS.md): both sweeps at the same figure of merit.
    const sigma = 1.1;
    const open = thrusts.map((t) => ({ thrust_N: t, power_W: idealPowerOpen(t, rho, A) / 0.6 }));
    const duct = thrusts.map((t) => ({ thrust_N: t * 1.1, power_W: idealPowerDucted(t * 1.1, rho, A, sigma) / 0.6 }));
    const e = ductEffectiveness(open, duct, { sigma });
    expect(e.idealPowerSaving).toBeCloseTo(1 - 1 / Math.sqrt(2.2), 12);
    expect(e.powerSaving).toBeCloseTo(e.idealPowerSaving, 9);
    expect(e.effectiveness).toBeCloseTo(1, 9);
    expect(e.thrustGain).toBeCloseTo(Math.cbrt(2.2) - 1, 9);
    expect(e.netThrustGain).toBeCloseTo(e.thrustGain, 12);
    expect(e.paysForItsWeight).toBe(true);
  });

  it('half the ideal saving scores 0.5; a heavy duct does not pay for its weight', () => {
    const sigma = 1.2;
    const ideal = 1 - 1 / Math.sqrt(2.4);
    const open = thrusts.map((t) => ({ thrust_N: t, power_W: 10 * t ** 1.5 }));
    const duct = thrusts.map((t) => ({ thrust_N: t, power_W: 10 * t ** 1.5 * (1 - ideal / 2) }));
    const e = ductEffectiveness(open, duct, { sigma, ductMass_kg: 0.3 });
    expect(e.effectiveness).toBeCloseTo(0.5, 9);
    for (const l of e.levels) expect(l.effectiveness).toBeCloseTo(0.5, 9);
    // Equal-power thrust ratio of two power laws P = c T^1.5: (c_open / c_duct)^(2/3).
    expect(e.thrustGain).toBeCloseTo(Math.pow(1 / (1 - ideal / 2), 2 / 3) - 1, 9);
    expect(e.ductWeight_N).toBeCloseTo(0.3 * 9.80665, 12);
    expect(e.netThrustGain).toBeLessThan(e.thrustGain);
    expect(e.paysForItsWeight).toBe(false);
  });

  it('refuses sweeps that do not overlap', () => {
    const open = [1, 2].map((t) => ({ thrust_N: t, power_W: 10 * t }));
    const duct = [5, 6].map((t) => ({ thrust_N: t, power_W: 10 * t }));
    expect(() => ductEffectiveness(open, duct, { sigma: 1.1 })).toThrow(CalibrationError);
  });
});
