// Duct-versus-baseline arithmetic on sessions made from ideal momentum theory, where the answers are known in
// closed form.
//
// Source: momentum (actuator-disk) theory in hover; open rotor from Leishman, Principles of Helicopter
// Aerodynamics; shrouded rotor after McCormick, Aerodynamics of V/STOL Flight (1967) and Pereira (PhD thesis,
// University of Maryland, 2008), ducted forms from memory, as listed in CHECKS.md. Derivation of the ducted form:
// far wake area A_e = sigma A, wake speed w; mass flow m = rho A_e w; thrust (rotor + duct) T = m w; power
// P = m w^2 / 2. Then T = rho sigma A w^2, w = sqrt(T / (rho sigma A)), P = T w / 2 = T^1.5 / sqrt(4 sigma rho A).
// sigma = 0.5 gives the open rotor (its wake contracts to half the disk area): P = T^1.5 / sqrt(2 rho A).
// At equal thrust P_duct / P_open = 1 / sqrt(2 sigma) -> saving 1 - 1/sqrt(2) = 29.29 % at sigma 1.
// At equal power T_duct / T_open = (2 sigma)^(1/3) -> 1.2599 at sigma 1, a 26 % gain.

import { describe, expect, it } from 'vitest';
import { compareSessions, idealSaving, idealThrustRatio, rigSigma } from '../server/compare/compare.js';
import { evaluate, G0, grid, measuredPoints, powerCurve } from '../server/compare/curve.js';
import { idealPower, idealSession } from '../server/compare/synthetic.js';

const range = (lo: number, hi: number, n: number) => grid(lo, hi, n);
/** Thrusts of an even throttle sweep: thrust grows about as throttle squared (common practice), so steps are even in sqrt(T). */
const sweep = (lo: number, hi: number, n: number) => grid(Math.sqrt(lo), Math.sqrt(hi), n).map((x) => x * x);

describe('momentum-theory sessions', () => {
  const open = idealSession({ id: 1, sigma: null, thrusts: sweep(0.5, 10, 40) });
  const ducted = idealSession({ id: 2, sigma: 1.0, thrusts: sweep(0.5, 10, 40) });

  it('sigma comes from the rig snapshot', () => {
    expect(rigSigma(open.rig)).toBe(0);
    expect(rigSigma(ducted.rig)).toBeCloseTo(1.0, 12);
  });

  it('shows a 29.3 % power saving at equal thrust at every grid thrust', () => {
    const c = compareSessions([open, ducted], { gridPoints: 15 });
    expect(c.baseline).toBe(1);
    expect(c.common_range_N![0]).toBeCloseTo(0.5, 12);
    expect(c.common_range_N![1]).toBeCloseTo(10, 12);
    expect(c.rows).toHaveLength(15);
    for (const r of c.rows) {
      // 1 - 1/sqrt(2) = 0.292893 (momentum theory, CHECKS.md). Same thrust knots: exact up to rounding.
      expect(r.power_saving_pct).toBeCloseTo(29.2893, 3);
      expect(r.ideal_saving_pct).toBeCloseTo(29.2893, 3);
      expect(r.duct_effectiveness).toBeCloseTo(1, 6);
      expect(r.power_W).toBeLessThan(r.baseline_power_W);
    }
  });

  it('shows a 26 % thrust gain at equal power where the ducted power range reaches', () => {
    const c = compareSessions([open, ducted], { gridPoints: 15 });
    const withGain = c.rows.filter((r) => r.thrust_gain_pct !== null);
    // The ducted rotor needs less power for the same thrust, so at the top of the grid the baseline's power is
    // beyond what the ducted session measured: those rows have no gain (no extrapolation) and a note says so.
    expect(withGain.length).toBeGreaterThan(5);
    expect(withGain.length).toBeLessThan(c.rows.length);
    expect(c.notes.some((n) => /thrust gain at equal power is missing/.test(n))).toBe(true);
    const expected = (idealThrustRatio(1) - 1) * 100; // (2 sigma)^(1/3) - 1 = 25.99 % (momentum theory)
    expect(expected).toBeCloseTo(25.99, 2);
    for (const r of withGain) {
      // Piecewise-linear interpolation of a T^1.5 curve on 40 sweep knots: within 0.25 percentage points (the
      // interpolation error, largest at the low end where the curve bends most relative to its value).
      expect(Math.abs(r.thrust_gain_pct! - expected)).toBeLessThan(0.25);
      // Never extrapolated: the thrust found lies inside the ducted session's measured range.
      expect(r.thrust_at_equal_power_N!).toBeLessThanOrEqual(10);
    }
  });

  it('holds when the two sessions were measured at different thrusts', () => {
    const d2 = idealSession({ id: 3, sigma: 1.0, thrusts: range(0.8, 9.3, 23) });
    const c = compareSessions([open, d2], { gridPoints: 12 });
    expect(c.common_range_N![0]).toBeCloseTo(0.8, 12);
    expect(c.common_range_N![1]).toBeCloseTo(9.3, 12);
    // Knots no longer line up, so each curve's chord error (relative size about 0.09 (h / T)^2 for T^1.5 with
    // knot spacing h, from the linear-interpolation remainder f'' h^2 / 8) enters; it shrinks with thrust.
    for (const r of c.rows) {
      const h = (9.3 - 0.8) / 22;
      expect(Math.abs(r.power_saving_pct - 29.2893)).toBeLessThan(100 * 0.1 * (h / r.thrust_N) ** 2 + 0.01);
      if (r.thrust_N > 3) expect(Math.abs(r.power_saving_pct - 29.2893)).toBeLessThan(0.05);
    }
    expect(c.notes.some((n) => /Session 1 measured 0\.50–10\.00 N; its points below 0\.80 N and above 9\.30 N/.test(n))).toBe(true);
  });

  it('ideal saving of other sigmas and of a ducted baseline', () => {
    expect(idealSaving(0.5)).toBeCloseTo(0, 12);
    expect(idealSaving(1.2)).toBeCloseTo(1 - 1 / Math.sqrt(2.4), 12);
    // Worked example in CHECKS.md (derived): T = 5 N, D = 0.254 m, rho 1.225 -> 31.73 W open, 20.48 W at sigma 1.2.
    expect(idealPower(5, null, 0.254, 1.225)).toBeCloseTo(31.73, 2);
    expect(idealPower(5, 1.2, 0.254, 1.225)).toBeCloseTo(20.48, 2);
    // Against a sigma-1 baseline, a sigma-1.2 duct ideally saves 1 - sqrt(1/1.2).
    expect(idealSaving(1.2, 1)).toBeCloseTo(1 - Math.sqrt(1 / 1.2), 12);
  });

  it('an open rotor against an open rotor has no ideal saving and no effectiveness', () => {
    const worse = idealSession({ id: 4, sigma: null, thrusts: sweep(0.5, 10, 40), powerScale: 1.1 });
    const c = compareSessions([open, worse], { gridPoints: 5 });
    for (const r of c.rows) {
      expect(r.ideal_saving_pct).toBe(0);
      expect(r.duct_effectiveness).toBeNull();
      expect(r.power_saving_pct).toBeCloseTo((1 - 1.1) * 100, 6);
      if (r.thrust_gain_pct !== null) expect(r.thrust_gain_pct).toBeLessThan(0);
    }
    // At the bottom of the grid the baseline's power is below anything the worse rotor drew: no gain there.
    expect(c.rows[0].thrust_gain_pct).toBeNull();
    expect(c.rows.filter((r) => r.thrust_gain_pct !== null).length).toBeGreaterThan(2);
  });

  it('net thrust subtracts the duct weight', () => {
    const heavy = idealSession({ id: 5, sigma: 1.0, thrusts: sweep(0.5, 10, 40), duct_mass_kg: 0.05 });
    const c = compareSessions([open, heavy], { gridPoints: 4 });
    for (const r of c.rows) expect(r.net_thrust_N).toBeCloseTo(r.thrust_N - 0.05 * G0, 12);
  });

  it('propagates thrust and power spreads into error bars', () => {
    const a = idealSession({ id: 1, sigma: null, thrusts: range(1, 8, 20), relStd: 0.02 });
    const b = idealSession({ id: 2, sigma: 1, thrusts: range(1, 8, 20), relStd: 0.02 });
    const quiet = compareSessions([idealSession({ id: 1, sigma: null, thrusts: range(1, 8, 20) }), idealSession({ id: 2, sigma: 1, thrusts: range(1, 8, 20) })]);
    const c = compareSessions([a, b]);
    for (const r of quiet.rows) expect(r.power_saving_std_pct).toBe(0);
    for (const r of c.rows) {
      // Each power spread: hypot(2 % of P, slope * 2 % of T) = 2 % * P * hypot(1, 1.5) (P ~ T^1.5, so T dP/dT = 1.5 P,
      // exact at the knots, close between them); the ratio's relative spread is sqrt(2) times that.
      const rel = 0.02 * Math.hypot(1, 1.5) * Math.SQRT2;
      expect(r.power_saving_std_pct / ((1 - r.power_saving_pct / 100) * 100)).toBeGreaterThan(rel * 0.9);
      expect(r.power_saving_std_pct / ((1 - r.power_saving_pct / 100) * 100)).toBeLessThan(rel * 1.1);
    }
  });
});

describe('ranges', () => {
  it('reports a session that does not overlap the baseline and leaves it out', () => {
    const base = idealSession({ id: 1, sigma: null, thrusts: range(2, 8, 10) });
    const low = idealSession({ id: 2, sigma: 1, thrusts: range(0.2, 1.5, 6) });
    const ok = idealSession({ id: 3, sigma: 1, thrusts: range(3, 12, 10) });
    const c = compareSessions([base, low, ok], { gridPoints: 6 });
    expect(c.sessions.find((s) => s.session === 2)!.compared).toBe(false);
    expect(c.notes.some((n) => n.includes('Session 2 measured 0.20–1.50 N, baseline 1 measured 2.00–8.00 N: no thrust in common'))).toBe(true);
    expect(c.rows.every((r) => r.session === 3)).toBe(true);
    expect(c.common_range_N).toEqual([3, 8]);
    // Never extrapolated: every grid thrust lies inside both measured ranges.
    for (const r of c.rows) expect(r.thrust_N >= 3 - 1e-12 && r.thrust_N <= 8 + 1e-12).toBe(true);
  });

  it('with nothing in common there are no rows at all', () => {
    const base = idealSession({ id: 1, sigma: null, thrusts: range(2, 8, 10) });
    const far = idealSession({ id: 2, sigma: 1, thrusts: range(9, 12, 10) });
    const c = compareSessions([base, far]);
    expect(c.rows).toEqual([]);
    expect(c.common_range_N).toBeNull();
    expect(c.notes.join(' ')).toMatch(/no thrust in common/);
  });

  it('a curve refuses thrusts outside its measured range', () => {
    const s = idealSession({ id: 1, sigma: null, thrusts: [1, 2, 3] });
    const c = powerCurve(measuredPoints(s.points));
    expect(evaluate(c, 0.99)).toBeNull();
    expect(evaluate(c, 3.01)).toBeNull();
    expect(evaluate(c, 2)!.y).toBeCloseTo(idealPower(2, null, 0.254, 1.225), 12);
  });
});

describe('vehicle verdict', () => {
  const thrusts = range(0.5, 12, 50);
  const open = idealSession({ id: 1, sigma: null, thrusts });

  it('says plainly that a heavy duct loses', () => {
    // 1.2 kg quad: 2.94 N per motor. A 250 g duct adds 2.45 N per motor; at these thrusts the 29 % saving is
    // far smaller than the extra power for lifting 83 % more.
    const heavy = idealSession({ id: 2, sigma: 1, thrusts, duct_mass_kg: 0.25 });
    const c = compareSessions([open, heavy], { vehicle: { mass_kg: 1.2, motors: 4, battery_wh: 50 } });
    const v = c.verdict!;
    const h = v.sessions[1];
    expect(h.hover_thrust_per_motor_N).toBeCloseTo((1.2 * G0) / 4 + 0.25 * G0, 12);
    expect(h.outcome).toBe('loses');
    expect(h.power_per_motor_W!).toBeGreaterThan(v.sessions[0].power_per_motor_W!);
    expect(v.text[1]).toMatch(/LOSES/);
    expect(v.text[1]).toMatch(/duct weighs more than its saving/);
    // Break-even mass (derived from the ideal curves): P_d(T0 + m g0) = P_o(T0) -> T0 + m g0 = T0 (2 sigma)^(1/3).
    const T0 = (1.2 * G0) / 4;
    expect(h.break_even_duct_mass_kg!).toBeCloseTo((T0 * (Math.cbrt(2) - 1)) / G0, 3);
    expect(h.endurance_min!).toBeCloseTo(50 / h.total_power_W! * 60, 9);
  });

  it('says a light duct wins', () => {
    const light = idealSession({ id: 2, sigma: 1, thrusts, duct_mass_kg: 0.02 });
    const c = compareSessions([open, light], { vehicle: { mass_kg: 1.2, motors: 4, battery_wh: 50 } });
    expect(c.verdict!.sessions[1].outcome).toBe('wins');
    expect(c.verdict!.sessions[1].endurance_min!).toBeGreaterThan(c.verdict!.sessions[0].endurance_min!);
    expect(c.verdict!.text[1]).toMatch(/wins/);
  });

  it('refuses to extrapolate when the hover thrust is outside the measured range', () => {
    const light = idealSession({ id: 2, sigma: 1, thrusts: range(0.5, 3, 10), duct_mass_kg: 0.02 });
    // 1.2 kg on 4 motors with a 20 g duct needs 3.14 N per motor: above 3 N measured.
    const c = compareSessions([open, light], { vehicle: { mass_kg: 1.2, motors: 4, battery_wh: 50 } });
    const r = c.verdict!.sessions[1];
    expect(r.in_range).toBe(false);
    expect(r.power_per_motor_W).toBeNull();
    expect(r.endurance_min).toBeNull();
    expect(r.outcome).toBe('unknown');
    expect(c.verdict!.text[1]).toMatch(/outside the measured 0\.50–3\.00 N; no figure without extrapolating/);
  });
});
