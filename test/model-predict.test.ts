import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
  buildRigModel,
  deviation,
  idealPowerDucted,
  idealPowerOpen,
  isaAir,
  parseRig,
  predictAtThrottle,
  predictAtThrusts,
  predictCurve,
  type RigSpec,
} from '../server/model/index.js';

const rig = (name: string): RigSpec => parseRig(JSON.parse(readFileSync(new URL(`../examples/rigs/${name}`, import.meta.url), 'utf8')));
const openRig = rig('quorrel-open.json');
const ductRig = rig('quorrel-duct.json');

describe('prediction curve', () => {
  const open = predictCurve(buildRigModel(openRig), { points: 50 });
  const duct = predictCurve(buildRigModel(ductRig), { points: 50 });

  it('thrust, power, current and rpm rise with throttle; the bus voltage sags', () => {
    for (const c of [open, duct]) {
      expect(c.points).toHaveLength(50);
      for (let i = 1; i < c.points.length; i++) {
        const a = c.points[i - 1];
        const b = c.points[i];
        expect(b.throttle).toBeGreaterThan(a.throttle);
        expect(b.thrust_N).toBeGreaterThan(a.thrust_N);
        expect(b.powerElectrical_W).toBeGreaterThan(a.powerElectrical_W);
        expect(b.current_A).toBeGreaterThan(a.current_A);
        expect(b.rpm).toBeGreaterThan(a.rpm);
        expect(b.busVoltage_V).toBeLessThan(a.busVoltage_V);
      }
    }
  });

  it('never beats the momentum-theory ideal', () => {
    // Momentum theory bounds any real rotor (Leishman; ../shared/CHECKS.md): shaft power >= ideal power.
    for (const p of open.points) {
      expect(p.powerShaft_W).toBeGreaterThan(p.idealPowerOpen_W);
      expect(p.gramsPerWatt).toBeLessThan(p.idealGramsPerWattOpen);
    }
    for (const p of duct.points) {
      expect(p.powerShaft_W).toBeGreaterThan(p.idealPowerDucted_W!);
      expect(p.figureOfMeritShrouded!).toBeLessThan(1);
      expect(p.gramsPerWatt).toBeLessThan(p.idealGramsPerWattDucted!);
    }
  });

  it('carries the ideal reference lines', () => {
    const p = open.points[20];
    expect(p.idealPowerOpen_W).toBeCloseTo(idealPowerOpen(p.thrust_N, 1.225000018, Math.PI * 0.127 ** 2), 6);
    expect(p.idealPowerDucted_W).toBeNull();
    const q = duct.points[20];
    expect(q.idealPowerDucted_W).toBeCloseTo(idealPowerDucted(q.thrust_N, 1.225000018, Math.PI * 0.127 ** 2, 1.10002108), 6);
  });

  it('a realistic 10-inch, 860 Kv, 4S set: about 1.2 to 1.8 kgf at full throttle, 15 to 35 A', () => {
    // Common practice for this class of propeller and motor.
    const full = open.points[49];
    expect(full.thrust_N / 9.80665).toBeGreaterThan(1.2);
    expect(full.thrust_N / 9.80665).toBeLessThan(1.8);
    expect(full.current_A).toBeGreaterThan(15);
    expect(full.current_A).toBeLessThan(35);
  });

  it('the duct gives more grams per watt at equal thrust, with a power ratio near the ideal 1 / sqrt(2 sigma)', () => {
    // Direction from Pereira and Chopra (JAHS 2009), who also saw gains beyond the ideal ratio because the
    // shroud cuts tip losses; the ideal ratio 1 / sqrt(2 sigma) from momentum theory (../shared/CHECKS.md).
    const thrusts = [2, 4, 6, 8];
    const o = predictAtThrusts(buildRigModel(openRig), thrusts);
    const d = predictAtThrusts(buildRigModel(ductRig), thrusts);
    for (let i = 0; i < thrusts.length; i++) {
      const po = o[i].operating!;
      const pd = d[i].operating!;
      expect(pd.gramsPerWatt).toBeGreaterThan(po.gramsPerWatt);
      const ratio = pd.powerShaft_W / po.powerShaft_W;
      expect(ratio).toBeGreaterThan(1 / Math.sqrt(2 * 1.1) - 0.1);
      // The KD-1 duct has a 1 % gap and a 12 mm lip: the tip-gap loss keeps about 0.7 of the benefit and the
      // lip's entry loss takes more (duct-losses.ts), so the saving is about half the ideal's 33 %.
      expect(ratio).toBeLessThan(1 / Math.sqrt(2 * 1.1) + 0.2);
      expect(pd.thrust_N).toBeCloseTo(thrusts[i], 8);
    }
  });

  it('thinner air needs more power for the same thrust', () => {
    // Momentum theory: P ~ 1 / sqrt(rho) at equal thrust.
    const sea = predictAtThrusts(buildRigModel(openRig), [5])[0].operating!;
    const high = predictAtThrusts(buildRigModel(openRig, { air: isaAir(3000) }), [5])[0].operating!;
    expect(high.powerShaft_W).toBeGreaterThan(sea.powerShaft_W);
    expect(high.rpm).toBeGreaterThan(sea.rpm);
  });

  it('an out-of-reach thrust is reported as such', () => {
    const r = predictAtThrusts(buildRigModel(openRig), [1000])[0];
    expect(r.operating).toBeNull();
    expect(r.idealPowerOpen_W).toBeGreaterThan(0);
  });

  it('a static table, when given for an open rig, replaces BEMT', () => {
    const withTable: RigSpec = { ...openRig, propeller: { ...openRig.propeller, static_table: { rpm: [3000, 9000], ct: [0.1, 0.11], cp: [0.04, 0.038] } } };
    const m = buildRigModel(withTable);
    expect(m.source).toBe('table');
    const p = predictAtThrottle(m, 0.6);
    const n = p.rpm / 60;
    const ct = p.thrust_N / (1.225000018 * n * n * 0.254 ** 4);
    expect(ct).toBeGreaterThan(0.1);
    expect(ct).toBeLessThan(0.11);
    const back = predictAtThrusts(m, [p.thrust_N])[0].operating!;
    expect(back.throttle).toBeCloseTo(0.6, 6);
    expect(buildRigModel(withTable, { propellerSource: 'bemt' }).source).toBe('bemt');
  });
});

describe('deviation', () => {
  const model = buildRigModel(openRig);
  it('is zero for a point the model itself predicts', () => {
    const p = predictAtThrottle(model, 0.55, 15.1);
    const d = deviation(model, { throttle: 0.55, busVoltage_V: 15.1, thrust_N: p.thrust_N, power_W: p.powerElectrical_W, rpm: p.rpm });
    expect(Math.abs(d.percent.thrust)).toBeLessThan(1e-9);
    expect(Math.abs(d.percent.power!)).toBeLessThan(1e-9);
    expect(Math.abs(d.percent.current!)).toBeLessThan(1e-9);
    expect(Math.abs(d.percent.rpm!)).toBeLessThan(1e-9);
    expect(Math.abs(d.gramsPerWattAtEqualThrust!)).toBeLessThan(1e-6);
  });

  it('reports a measured excess in percent and leaves unmeasured quantities null', () => {
    const p = predictAtThrottle(model, 0.7, 14.8);
    const d = deviation(model, { throttle: 0.7, busVoltage_V: 14.8, thrust_N: p.thrust_N * 1.05, current_A: p.current_A * 0.9 });
    expect(d.percent.thrust).toBeCloseTo(5, 9);
    expect(d.percent.current).toBeCloseTo(-10, 9);
    expect(d.percent.power).toBeCloseTo(-10, 9);
    expect(d.percent.rpm).toBeNull();
    // 5 % more thrust for 10 % less power: more grams per watt than predicted.
    expect(d.percent.gramsPerWatt).toBeCloseTo((1.05 / 0.9 - 1) * 100, 9);
    expect(d.gramsPerWattAtEqualThrust!).toBeGreaterThan(0);
  });
});
