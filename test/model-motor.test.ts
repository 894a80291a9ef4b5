import { describe, expect, it } from 'vitest';
import {
  escDuty,
  throttleForDuty,
  maxEfficiencyPoint,
  motorAtCurrent,
  operatingPointForThrust,
  solveOperatingPoint,
  type Drivetrain,
  type PropellerLoad,
} from '../server/model/index.js';

const motor = { kv_rpm_per_v: 1000, resistance_ohm: 0.1, noLoadCurrent_a: 0.5, noLoadVoltage_v: 11.1 };

/** A propeller-like load: torque k Omega^2, thrust c Omega^2. */
function quadraticLoad(k: number, c: number): PropellerLoad {
  return {
    torqueAt: (w) => k * w * w,
    thrustAt: (w) => c * w * w,
    omegaForThrust: (t) => Math.sqrt(t / c),
  };
}

describe('first-order DC motor, worked example', () => {
  // Drela, First-Order DC Electric Motor Model, MIT 2007; example derived in ../shared/CHECKS.md:
  // Kv 1000 rpm/V, R 0.1 ohm, i0 0.5 A, v 11.1 V -> i* 7.45 A, eta 0.870, 10355 rpm, Q 0.0664 N m,
  // 72.0 W shaft from 82.7 W electrical.
  const p = maxEfficiencyPoint(motor, 11.1);
  it('maximum-efficiency current, efficiency, speed, torque and powers', () => {
    expect(p.current_a).toBeCloseTo(7.45, 2);
    expect(p.efficiency).toBeCloseTo(0.87, 3);
    expect(p.etaMaxClosedForm).toBeCloseTo(p.efficiency, 12);
    expect(p.rpm).toBeCloseTo(10355, -1);
    expect(p.torque_Nm).toBeCloseTo(0.0664, 4);
    expect(p.shaftPower_W).toBeCloseTo(72.0, 1);
    expect(p.electricalPower_W).toBeCloseTo(82.7, 1);
  });

  it('efficiency is lower on either side of i*', () => {
    // Drela 2007: eta(i) = (1 - i0 / i)(1 - i R / v) peaks at i*.
    expect(motorAtCurrent(motor, 11.1, 4).efficiency).toBeLessThan(p.efficiency);
    expect(motorAtCurrent(motor, 11.1, 15).efficiency).toBeLessThan(p.efficiency);
    const i = 12;
    expect(motorAtCurrent(motor, 11.1, i).efficiency).toBeCloseTo((1 - 0.5 / i) * (1 - (i * 0.1) / 11.1), 12);
  });

  it('the operating-point solver lands on the worked example when the load matches it', () => {
    const omega = (10355.4 * Math.PI) / 30;
    const q = (Math.sqrt(55.5) - 0.5) / ((1000 * Math.PI) / 30);
    const omegaStar = ((1000 * Math.PI) / 30) * (11.1 - Math.sqrt(55.5) * 0.1);
    const load = quadraticLoad(q / (omegaStar * omegaStar), 1e-5);
    const dt: Drivetrain = { motor, esc: {}, supply: { openCircuit_v: 11.1, internalResistance_ohm: 0 } };
    const op = solveOperatingPoint(dt, load, 1, 11.1);
    expect(op.motorCurrent_A).toBeCloseTo(7.45, 2);
    expect(op.rpm).toBeCloseTo(10355, -1);
    expect(op.torque_Nm).toBeCloseTo(0.0664, 4);
    expect(op.drivetrainEfficiency).toBeCloseTo(0.87, 3);
    expect(Math.abs(op.rpm - (omega * 30) / Math.PI)).toBeLessThan(5);
  });
});

describe('operating point', () => {
  const load = quadraticLoad(2e-8 * 60, 1.2e-5 * 10);
  const dt: Drivetrain = {
    motor: { kv_rpm_per_v: 860, resistance_ohm: 0.115, noLoadCurrent_a: 0.6, noLoadVoltage_v: 10 },
    esc: { efficiency: 0.95 },
    supply: { openCircuit_v: 16.8, internalResistance_ohm: 0.05 },
  };

  it('balances torque and conserves energy', () => {
    const op = solveOperatingPoint(dt, load, 0.7);
    const kv = (860 * Math.PI) / 30;
    expect((op.motorCurrent_A - 0.6) / kv).toBeCloseTo(load.torqueAt((op.rpm * Math.PI) / 30), 10);
    // Bus power = shaft + copper + no-load + ESC losses.
    const motorIn = op.motorVoltage_V * op.motorCurrent_A;
    expect(motorIn).toBeCloseTo(op.powerShaft_W + op.motorCurrent_A ** 2 * 0.115 + 0.6 * (op.rpm * Math.PI / 30) / kv, 8);
    expect(op.powerElectrical_W * 0.95).toBeCloseTo(motorIn, 8);
    // Supply sag: V = V_open - R_int i_bus.
    expect(op.busVoltage_V).toBeCloseTo(16.8 - 0.05 * op.current_A, 10);
  });

  it('more throttle gives more rpm, thrust and current; a measured voltage replaces the supply model', () => {
    const a = solveOperatingPoint(dt, load, 0.4);
    const b = solveOperatingPoint(dt, load, 0.8);
    expect(b.rpm).toBeGreaterThan(a.rpm);
    expect(b.thrust_N).toBeGreaterThan(a.thrust_N);
    expect(b.current_A).toBeGreaterThan(a.current_A);
    const m = solveOperatingPoint(dt, load, 0.8, 14.0);
    expect(m.busVoltage_V).toBe(14.0);
    expect(m.rpm).toBeLessThan(b.rpm);
  });

  it('thrust-to-throttle is the inverse of throttle-to-thrust', () => {
    for (const busV of [undefined, 15.5]) {
      const op = solveOperatingPoint(dt, load, 0.63, busV);
      const back = operatingPointForThrust(dt, load, op.thrust_N, busV);
      expect(back).not.toBeNull();
      expect(back!.throttle).toBeCloseTo(0.63, 8);
      expect(back!.powerElectrical_W).toBeCloseTo(op.powerElectrical_W, 6);
    }
    const resistive: Drivetrain = { ...dt, esc: { resistance_ohm: 0.01 } };
    const op = solveOperatingPoint(resistive, load, 0.5);
    expect(operatingPointForThrust(resistive, load, op.thrust_N)!.throttle).toBeCloseTo(0.5, 8);
  });

  it('an unreachable thrust gives null, zero throttle gives nothing, a bad throttle throws', () => {
    const full = solveOperatingPoint(dt, load, 1);
    expect(operatingPointForThrust(dt, load, full.thrust_N * 1.05)).toBeNull();
    const zero = solveOperatingPoint(dt, load, 0);
    expect(zero.thrust_N).toBe(0);
    expect(zero.current_A).toBe(0);
    expect(() => solveOperatingPoint(dt, load, 1.2)).toThrow(/throttle/);
  });

  it('a motor that cannot overcome its no-load current stands still', () => {
    // First-order model: below i0 R volts no torque is left for the load.
    const op = solveOperatingPoint(dt, load, 0.004, 16);
    expect(op.stalled).toBe(true);
    expect(op.rpm).toBe(0);
    expect(op.thrust_N).toBe(0);
  });

  it('grams per watt is thrust in gram-force per electrical watt', () => {
    // 1 gf = 9.80665e-3 N (../shared/CHECKS.md).
    const op = solveOperatingPoint(dt, load, 0.5);
    expect(op.gramsPerWatt).toBeCloseTo(op.thrust_N / 9.80665e-3 / op.powerElectrical_W, 12);
  });

  it('an ESC throttle offset: no output below it, the same operating point at the duty it maps to', () => {
    // d = (u - u0) / (1 - u0): the bottom of the range is dead, full throttle is still full duty.
    const withOffset: Drivetrain = { ...dt, esc: { ...dt.esc, throttleOffset: 0.05 } };
    expect(escDuty(withOffset.esc, 0.04)).toBe(0);
    expect(escDuty(withOffset.esc, 1)).toBeCloseTo(1, 12);
    expect(throttleForDuty(withOffset.esc, escDuty(withOffset.esc, 0.6))).toBeCloseTo(0.6, 12);
    const idle = solveOperatingPoint(withOffset, load, 0.04);
    expect(idle.stalled).toBe(true);
    expect(idle.current_A).toBe(0);
    for (const busV of [undefined, 15.5]) {
      const a = solveOperatingPoint(withOffset, load, 0.6, busV);
      const b = solveOperatingPoint(dt, load, escDuty(withOffset.esc, 0.6), busV);
      expect(a.throttle).toBe(0.6);
      expect(a.rpm).toBeCloseTo(b.rpm, 8);
      expect(a.powerElectrical_W).toBeCloseTo(b.powerElectrical_W, 8);
      expect(a.rpm).toBeLessThan(solveOperatingPoint(dt, load, 0.6, busV).rpm);
      const back = operatingPointForThrust(withOffset, load, a.thrust_N, busV);
      expect(back!.throttle).toBeCloseTo(0.6, 8);
    }
    expect(() => solveOperatingPoint({ ...dt, esc: { throttleOffset: 0.7 } }, load, 0.8)).toThrow(/throttleOffset/);
  });
});
