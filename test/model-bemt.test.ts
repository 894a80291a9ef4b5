import { describe, expect, it } from 'vitest';
import {
  bladeFromPropeller,
  diskArea,
  idealPowerDucted,
  idealPowerOpen,
  prandtlTipLoss,
  prepareRotor,
  omegaForThrust,
  rotorAt,
  rotorCoefficients,
  SEA_LEVEL_AIR,
  type BladeDefinition,
} from '../server/model/index.js';

const deg = Math.PI / 180;

/** A blade of constant chord (rotor solidity `solidity`) and ideal twist theta = thetaTip / x. */
function idealBlade(solidity: number, thetaTip: number, radius = 0.127, blades = 2): BladeDefinition {
  return {
    radius_m: radius,
    blades,
    rootCutout: 0,
    chordAt: () => (solidity * Math.PI * radius) / blades,
    pitchAt: (x) => thetaTip / x,
  };
}

/** The polar the closed-form hover theory assumes: linear lift, no stall, constant drag. */
const closedFormPolar = {
  liftSlope_perRad: 5.73,
  zeroLiftAngle_rad: 0,
  clMax: Number.POSITIVE_INFINITY,
  cd0: 0.011,
  reynoldsExponent: 0,
  liftReynoldsExponent: 0,
  inducedDragK: 0,
  stallDragFactor: 0,
};

describe('Prandtl tip loss', () => {
  it('F at r = 0.7, 0.9, 0.95 for two blades, inflow ratio 0.05', () => {
    // Leishman, Principles of Helicopter Aerodynamics, ch. 3 (from memory); values derived in ../shared/CHECKS.md.
    expect(prandtlTipLoss(0.7, 0.05 / 0.7, 2)).toBeCloseTo(0.998, 3);
    expect(prandtlTipLoss(0.9, 0.05 / 0.9, 2)).toBeCloseTo(0.914, 3);
    expect(prandtlTipLoss(0.95, 0.05 / 0.95, 2)).toBeCloseTo(0.76, 3);
    expect(prandtlTipLoss(1, 0.05, 2)).toBe(0);
  });
});

describe('BEMT against the uniform-inflow closed form', () => {
  // ../shared/CHECKS.md (derived from Leishman's formulas): solidity 0.1, a = 5.73 /rad, collective 8 deg,
  // Cd0 0.011, kappa 1.15 -> CT = 0.00569, lambda = 0.0533, CP = 4.87e-4, FM = 0.62.
  // With uniform inflow, CT = (sigma a / 2)(theta0 / 3 - lambda / 2) for constant pitch theta0, and
  // CT = (sigma a / 4)(thetaTip - lambda) for ideal twist: the same CT at thetaTip = 2 theta0 / 3. Ideal twist
  // is the case where BEMT without tip loss must give exactly uniform inflow, so BEMT has to agree there.
  const blade = idealBlade(0.1, ((2 / 3) * 8) * deg);
  const rotor = prepareRotor(blade, { kind: 'open' }, { tipLoss: false, polar: closedFormPolar, factors: { inducedFactor: 1.15 } });
  const omega = 600;
  const c = rotorCoefficients(rotor, omega, SEA_LEVEL_AIR);

  it('CT, CP and FM of the worked example', () => {
    expect(c.ct).toBeCloseTo(0.00569, 5);
    expect(c.cp / 4.87e-4).toBeCloseTo(1, 2);
    expect(c.fm).toBeCloseTo(0.62, 2);
  });

  it('inflow is uniform at lambda = 0.0533', () => {
    for (const s of rotor.stations) expect(s.inflow).toBeCloseTo(0.0533, 4);
  });

  it('does not depend on the number of stations', () => {
    const r80 = prepareRotor(blade, { kind: 'open' }, { stations: 80, tipLoss: false, polar: closedFormPolar, factors: { inducedFactor: 1.15 } });
    const c80 = rotorCoefficients(r80, omega, SEA_LEVEL_AIR);
    expect(c80.ct).toBeCloseTo(c.ct, 10);
    expect(c80.cp / c.cp).toBeCloseTo(1, 3);
  });
});

describe('BEMT induced power against momentum theory', () => {
  // With ideal twist, no tip loss and no profile drag the rotor is the actuator disk: open and ducted induced
  // power must equal T^1.5 / sqrt(2 rho A) and T^1.5 / sqrt(4 sigma rho A) (../shared/CHECKS.md).
  const polar = { ...closedFormPolar, cd0: 0 };
  const blade = idealBlade(0.09, 6 * deg);
  const A = diskArea(2 * blade.radius_m);
  it('open rotor', () => {
    const s = rotorAt(prepareRotor(blade, { kind: 'open' }, { tipLoss: false, polar }), 700, SEA_LEVEL_AIR);
    expect(s.power_W / idealPowerOpen(s.thrust_N, SEA_LEVEL_AIR.density_kg_m3, A)).toBeCloseTo(1, 8);
  });
  for (const sigma of [0.8, 1.1, 1.4]) {
    it(`ducted rotor at sigma ${sigma}: power and rotor share 1 / (2 sigma)`, () => {
      const s = rotorAt(
        prepareRotor(blade, { kind: 'ducted', sigmaEffective: sigma, tipLossWeight: 0 }, { tipLoss: false, polar }),
        700,
        SEA_LEVEL_AIR,
      );
      expect(s.power_W / idealPowerDucted(s.thrust_N, SEA_LEVEL_AIR.density_kg_m3, A, sigma)).toBeCloseTo(1, 8);
      expect(s.rotorThrust_N / s.thrust_N).toBeCloseTo(1 / (2 * sigma), 12);
    });
  }
  it('a duct at sigma 0.5 with full tip loss is the open rotor', () => {
    const prop = bladeFromPropeller({ diameter_m: 0.254, pitch_m: 0.1143, blades: 2 });
    const a = rotorAt(prepareRotor(prop, { kind: 'open' }), 600, SEA_LEVEL_AIR);
    const b = rotorAt(prepareRotor(prop, { kind: 'ducted', sigmaEffective: 0.5, tipLossWeight: 1 }), 600, SEA_LEVEL_AIR);
    expect(b.thrust_N).toBeCloseTo(a.thrust_N, 12);
    expect(b.power_W).toBeCloseTo(a.power_W, 12);
  });
});

describe('BEMT of a typical small propeller', () => {
  const prop = bladeFromPropeller({ diameter_m: 0.254, pitch_m: 0.1143, blades: 2 });
  const rotor = prepareRotor(prop, { kind: 'open' });
  it('static CT and FM inside published ranges', () => {
    // Brandt and Selig, Propeller performance data at low Reynolds numbers, AIAA 2011-1255 (from memory):
    // static CT about 0.08..0.16 and FM about 0.5..0.7 for small two-blade propellers.
    for (const rpm of [3000, 5000, 7000, 9000]) {
      const s = rotorAt(rotor, (rpm * Math.PI) / 30, SEA_LEVEL_AIR);
      expect(s.ct).toBeGreaterThan(0.08);
      expect(s.ct).toBeLessThan(0.16);
      expect(s.figureOfMerit).toBeGreaterThan(0.5);
      expect(s.figureOfMerit).toBeLessThan(0.7);
    }
  });

  it('figure of merit rises with rpm (Reynolds number) as measured on small propellers', () => {
    // Brandt and Selig (from memory): static efficiency of small propellers improves with Reynolds number.
    const lo = rotorAt(rotor, 300, SEA_LEVEL_AIR).figureOfMerit;
    const hi = rotorAt(rotor, 1000, SEA_LEVEL_AIR).figureOfMerit;
    expect(hi).toBeGreaterThan(lo);
  });

  it('tip loss lowers thrust and figure of merit', () => {
    // Leishman ch. 3: Prandtl tip loss reduces the effective disk area near the tip.
    const without = rotorAt(prepareRotor(prop, { kind: 'open' }, { tipLoss: false }), 600, SEA_LEVEL_AIR);
    const withLoss = rotorAt(rotor, 600, SEA_LEVEL_AIR);
    expect(withLoss.thrust_N).toBeLessThan(without.thrust_N);
    expect(withLoss.figureOfMerit).toBeLessThan(without.figureOfMerit);
  });

  it('thrust scales with rpm squared when lift has no Reynolds effect', () => {
    // Static propeller law T = CT rho n^2 D^4 with CT independent of speed.
    const flat = prepareRotor(prop, { kind: 'open' }, { polar: { liftReynoldsExponent: 0 } });
    const a = rotorAt(flat, 400, SEA_LEVEL_AIR).thrust_N;
    const b = rotorAt(flat, 800, SEA_LEVEL_AIR).thrust_N;
    expect(b / a).toBeCloseTo(4, 10);
  });

  it('static CT rises with rpm through the Reynolds number, as measured on small two-blade propellers', () => {
    // Brandt and Selig, AIAA 2011-1255 (from memory): the static CT of small two-blade propellers rises with
    // rpm, by some 5 to 15 % from 3000 to 7000 rpm on 9- to 11-inch propellers, inside 0.08..0.16.
    // Tolerance: rising at every step, 2 to 20 % over 3000 -> 7000 rpm.
    const cts = [3000, 4000, 5000, 6000, 7000].map((rpm) => rotorAt(rotor, (rpm * Math.PI) / 30, SEA_LEVEL_AIR).ct);
    for (let k = 1; k < cts.length; k++) expect(cts[k]).toBeGreaterThan(cts[k - 1]);
    expect(cts[4] / cts[0]).toBeGreaterThan(1.02);
    expect(cts[4] / cts[0]).toBeLessThan(1.2);
    // Thrust then grows faster than rpm squared, and the speed for a thrust is solved consistently.
    const a = rotorAt(rotor, 400, SEA_LEVEL_AIR).thrust_N;
    const b = rotorAt(rotor, 800, SEA_LEVEL_AIR).thrust_N;
    expect(b / a).toBeGreaterThan(4);
    const w = omegaForThrust(rotor, 7, SEA_LEVEL_AIR);
    expect(rotorAt(rotor, w, SEA_LEVEL_AIR).thrust_N).toBeCloseTo(7, 9);
  });

  it('factors act where they should: lift on thrust, drag and induced only on power', () => {
    const base = rotorAt(rotor, 600, SEA_LEVEL_AIR);
    const drag = rotorAt(prepareRotor(prop, { kind: 'open' }, { factors: { cd0Factor: 1.5 } }), 600, SEA_LEVEL_AIR);
    const ind = rotorAt(prepareRotor(prop, { kind: 'open' }, { factors: { inducedFactor: 1.2 } }), 600, SEA_LEVEL_AIR);
    const lift = rotorAt(prepareRotor(prop, { kind: 'open' }, { factors: { liftFactor: 1.1 } }), 600, SEA_LEVEL_AIR);
    expect(drag.thrust_N).toBe(base.thrust_N);
    expect(ind.thrust_N).toBe(base.thrust_N);
    expect(drag.power_W).toBeGreaterThan(base.power_W);
    expect(ind.power_W).toBeGreaterThan(base.power_W);
    expect(lift.thrust_N).toBeGreaterThan(base.thrust_N);
  });

  it('blade geometry from the rig is used when given', () => {
    const r = [0.2, 0.5, 1];
    const g = bladeFromPropeller({
      diameter_m: 0.254,
      pitch_m: 0.1143,
      blades: 2,
      geometry: { r_over_R: r, chord_m: [0.02, 0.024, 0.01], twist_deg: [30, 16, 8] },
    });
    expect(g.rootCutout).toBe(0.2);
    expect(g.chordAt(0.75)).toBeCloseTo(0.017, 12);
    expect(g.pitchAt(0.5)).toBeCloseTo(16 * deg, 12);
  });

  it('the default twist is the constant-pitch helix, theta = atan(pitch / (2 pi r))', () => {
    // Definition of geometric pitch (common practice).
    const r = 0.75 * 0.127;
    expect(prop.pitchAt(0.75)).toBeCloseTo(Math.atan(0.1143 / (2 * Math.PI * r)), 12);
  });
});
