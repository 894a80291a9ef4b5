import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
  diskArea,
  ductedVelocities,
  figureOfMeritFromCoefficients,
  figureOfMeritOpen,
  figureOfMeritShrouded,
  idealPowerDucted,
  idealPowerOpen,
  idealPowerRatio,
  idealThrustDucted,
  idealThrustOpen,
  idealThrustRatio,
  openVelocities,
  powerCoefficient,
  rotorThrustShare,
  thrustCoefficient,
} from '../server/model/index.js';

const A = diskArea(0.254);

describe('momentum theory, worked example', () => {
  it('T = 5 N, D = 0.254 m, rho = 1.225: 31.73 W open, 20.48 W ducted at sigma 1.2', () => {
    // Worked example derived in ../shared/CHECKS.md from Leishman (open) and McCormick / Pereira (ducted).
    expect(idealPowerOpen(5, 1.225, A)).toBeCloseTo(31.73, 2);
    expect(idealPowerDucted(5, 1.225, A, 1.2)).toBeCloseTo(20.48, 2);
  });

  it('ratios at sigma = 1: 0.7071 in power, 1.26 in thrust', () => {
    // ../shared/CHECKS.md: P_ducted / P_open = 1 / sqrt(2 sigma); T_ducted / T_open = (2 sigma)^(1/3).
    expect(idealPowerRatio(1)).toBeCloseTo(0.7071, 4);
    expect(idealThrustRatio(1)).toBeCloseTo(1.26, 2);
    expect(idealPowerDucted(7, 1.1, A, 1) / idealPowerOpen(7, 1.1, A)).toBeCloseTo(0.70711, 5);
    expect(idealThrustDucted(40, 1.1, A, 1) / idealThrustOpen(40, 1.1, A)).toBeCloseTo(Math.cbrt(2), 10);
  });

  it('sigma = 0.5 recovers the open rotor exactly', () => {
    // ../shared/CHECKS.md: sigma = 0.5 is the free wake's far-field contraction.
    fc.assert(
      fc.property(fc.double({ min: 0.01, max: 100, noNaN: true }), fc.double({ min: 0.3, max: 1.5, noNaN: true }), (T, rho) => {
        const open = idealPowerOpen(T, rho, A);
        expect(idealPowerDucted(T, rho, A, 0.5)).toBeCloseTo(open, 9);
        expect(rotorThrustShare(0.5)).toBe(1);
        expect(ductedVelocities(T, rho, A, 0.5).disk).toBeCloseTo(openVelocities(T, rho, A).disk, 10);
        expect(ductedVelocities(T, rho, A, 0.5).exit).toBeCloseTo(openVelocities(T, rho, A).wake, 10);
      }),
    );
  });
});

describe('momentum identities', () => {
  it('open rotor: P = T v, far wake twice the disk velocity', () => {
    // Leishman, Principles of Helicopter Aerodynamics, ch. 2 (actuator disk in hover).
    const v = openVelocities(5, 1.225, A);
    expect(v.wake).toBeCloseTo(2 * v.disk, 12);
    expect(idealPowerOpen(5, 1.225, A)).toBeCloseTo(5 * v.disk, 10);
    // Momentum: T = mdot * wake velocity, mdot = rho A v.
    expect(1.225 * A * v.disk * v.wake).toBeCloseTo(5, 10);
  });

  it('ducted rotor: mass, momentum and energy balance close', () => {
    // Derived from conservation laws (McCormick 1967; Pereira 2008), as in the comment of momentum.ts.
    fc.assert(
      fc.property(
        fc.double({ min: 0.1, max: 50, noNaN: true }),
        fc.double({ min: 0.5, max: 1.6, noNaN: true }),
        (T, sigma) => {
          const rho = 1.2;
          const { disk, exit } = ductedVelocities(T, rho, A, sigma);
          const mdot = rho * A * disk;
          expect(mdot).toBeCloseTo(rho * sigma * A * exit, 9); // mass
          expect(mdot * exit).toBeCloseTo(T, 9); // momentum
          expect(0.5 * mdot * exit * exit).toBeCloseTo(idealPowerDucted(T, rho, A, sigma), 8); // energy
          // Rotor pressure jump 0.5 rho w^2 over the disk gives the rotor's share of the thrust.
          expect((0.5 * rho * exit * exit * A) / T).toBeCloseTo(rotorThrustShare(sigma), 10);
        },
      ),
    );
  });

  it('within the supported range a larger sigma never predicts more ideal power', () => {
    // Property of P = T^1.5 / sqrt(4 sigma rho A) (../shared/CHECKS.md).
    fc.assert(
      fc.property(
        fc.double({ min: 0.5, max: 1.6, noNaN: true }),
        fc.double({ min: 0.5, max: 1.6, noNaN: true }),
        fc.double({ min: 0.01, max: 100, noNaN: true }),
        (s1, s2, T) => {
          const [lo, hi] = s1 <= s2 ? [s1, s2] : [s2, s1];
          expect(idealPowerDucted(T, 1.225, A, hi)).toBeLessThanOrEqual(idealPowerDucted(T, 1.225, A, lo));
        },
      ),
    );
  });

  it('figure of merit: ideal rotor scores 1; coefficient form agrees with the dimensional form', () => {
    // ../shared/CHECKS.md: FM = T^1.5 / (P sqrt(2 rho A)) = sqrt(2/pi) CT^1.5 / CP.
    const T = 6;
    const P = idealPowerOpen(T, 1.225, A) / 0.6;
    expect(figureOfMeritOpen(T, P, 1.225, A)).toBeCloseTo(0.6, 12);
    const n = 100;
    const ct = thrustCoefficient(T, 1.225, n, 0.254);
    const cp = powerCoefficient(P, 1.225, n, 0.254);
    expect(figureOfMeritFromCoefficients(ct, cp)).toBeCloseTo(0.6, 10);
    // A ducted rotor at its ideal power scores 1 in the shrouded form and above 1 in the open form.
    const Pd = idealPowerDucted(T, 1.225, A, 1.1);
    expect(figureOfMeritShrouded(T, Pd, 1.225, A, 1.1)).toBeCloseTo(1, 12);
    expect(figureOfMeritOpen(T, Pd, 1.225, A)).toBeGreaterThan(1);
  });

  it('rejects nonsense inputs', () => {
    expect(() => idealPowerOpen(-1, 1.2, A)).toThrow(/thrust_N/);
    expect(() => idealPowerDucted(1, 1.2, A, 0)).toThrow(/sigma/);
    expect(() => diskArea(Number.NaN)).toThrow(/diameter_m/);
  });
});
