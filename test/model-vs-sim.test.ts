// The main workflow against the virtual bench: measure an open sweep and a ducted sweep the way an operator
// would (telemetry only: noisy sensors, offsets, a lagging load cell), calibrate the model on the open sweep,
// predict the ducted rig with the calibrated factors, and compare grams per watt point by point.
//
// The virtual bench has its own physics (server/sim), kept apart from the model; nothing here reads its truth
// or its constants, only the wire telemetry through BenchHost in simulated time. The rigs are the bench's
// built-in demo rigs with their `sim` section removed, which is all the model is allowed to know.

import { beforeAll, describe, expect, it } from 'vitest';
import {
  buildRigModel,
  calibrate,
  deviation,
  ductEffectiveness,
  fitOpenPredictDuct,
  newtonsToGramForce,
  predictAtThrusts,
  DEFAULT_DUCT_LOSSES,
  type FitParameter,
  type MeasuredPoint,
  type ModelOptions,
  type RigModel,
  type RigSpec,
} from '../server/model/index.js';
import { VirtualBench } from '../server/sim/bench.js';
import { DEFAULT_DUCTED_RIG, DEFAULT_OPEN_RIG } from '../server/sim/default-rigs.js';
import { BenchHost } from '../server/sim/host-harness.js';

const THROTTLES = [0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9];
/**
 * Largest |deviation| of the calibrated model's grams per watt from the bench's, over every ducted point, %.
 * Re-measured when the bench's duct became a table of its own (server/sim/truth.ts) instead of sharing the
 * model's duct formulas, which made the earlier "within 10 %" partly true by construction. Measured on
 * 2026-12-02 (with the Reynolds-number effect on lift): 4.5 % max (3.3 % RMS) on the default duct, 7.4 % max
 * (3.4 % RMS) over the 20 ducts of the geometry test below; the sharp lip, the widest lips and the diffuser
 * just past its onset are the worst. Other seeds (7/8, 77, 140+) gave 4.3 % and 8.0 %. The threshold is the
 * fixed seeds' figure rounded up to the next whole percent (the seeds are fixed, so it is reproducible).
 */
const WITHIN_PERCENT = 8;
const SETTLE_MS = 1800;
const AVERAGE_MS = 500;

type Channel = 'thrust' | 'v' | 'i' | 'rpm';

function meanOf(host: BenchHost, key: Channel): number {
  const xs = host
    .of('TEL')
    .map((f) => f.fields[key])
    .filter((x): x is number => x !== undefined);
  if (xs.length === 0) throw new Error(`no ${key} telemetry in the averaging window`);
  return xs.reduce((a, b) => a + b, 0) / xs.length;
}

/**
 * A throttle staircase on the virtual bench, reduced to operating points from telemetry alone. Before arming,
 * as an operator would: read the current sensor at rest and take that reading off every later one (zeroing a
 * Hall current sensor with nothing running is common practice; the protocol has no command for it, so the
 * host does it), and TARE the load cell (it carries the stand's preload).
 */
function measureSweep(rig: RigSpec, seed: number): MeasuredPoint[] {
  // The figure below was measured with voltage and current at 500 samples/s. The virtual bench's default is now
  // 100/s, what 115200 baud carries (PROTOCOL.md, byte budget); this bench is in process with no line to fill,
  // so it keeps the rate the figure was measured at (250 readings per averaging window rather than 50).
  const bench = new VirtualBench({ rig: { ...rig, sim: { voltage_rate_hz: 500, current_rate_hz: 500, ...(rig.sim ?? {}) } }, seed });
  const host = new BenchHost(bench);
  host.handshake();
  host.run(300);
  const currentZero = meanOf(host, 'i');
  expect(host.command('TARE').tag).toBe('ACK');
  host.run(500);
  expect(host.command('ARM').tag).toBe('ACK');
  const points: MeasuredPoint[] = [];
  for (const u of THROTTLES) {
    expect(host.command('THR', { v: u }).tag).toBe('ACK');
    host.run(SETTLE_MS);
    host.clear();
    host.run(AVERAGE_MS);
    const v = meanOf(host, 'v');
    const i = meanOf(host, 'i') - currentZero;
    points.push({ throttle: u, busVoltage_V: v, current_A: i, power_W: v * i, thrust_N: meanOf(host, 'thrust'), rpm: meanOf(host, 'rpm') });
  }
  // Throttle first, then disarm (the safe order, even in simulation).
  host.command('THR', { v: 0 });
  host.command('DISARM');
  expect(host.badLines).toBe(0);
  return points;
}

/** The rig as the model may see it: the bench's truth section removed. */
function modelView(rig: RigSpec): RigSpec {
  const { sim: _truth, ...rest } = rig;
  return rest;
}

const rms = (xs: readonly number[]): number => Math.sqrt(xs.reduce((s, x) => s + x * x, 0) / xs.length);
const maxAbs = (xs: readonly number[]): number => Math.max(...xs.map(Math.abs));

/** Per-point deviations in % of thrust, power, rpm and grams per watt (same throttle, same bus voltage). */
function deviations(model: RigModel, pts: readonly MeasuredPoint[]): { thrust: number[]; power: number[]; rpm: number[]; gpw: number[]; gpwEqualThrust: number[] } {
  const d = pts.map((p) => deviation(model, p));
  return {
    thrust: d.map((x) => x.percent.thrust),
    power: d.map((x) => x.percent.power!),
    rpm: d.map((x) => x.percent.rpm!),
    gpw: d.map((x) => x.percent.gramsPerWatt!),
    gpwEqualThrust: d.map((x) => x.gramsPerWattAtEqualThrust ?? Number.NaN),
  };
}

const f1 = (x: number): string => (x >= 0 ? ' ' : '') + x.toFixed(1);

describe('model against the virtual bench: calibrate on the open sweep, predict the duct', () => {
  const openRig = modelView(DEFAULT_OPEN_RIG);
  const ductRig = modelView(DEFAULT_DUCTED_RIG);
  // Propeller factors, the ESC's throttle offset and the motor's no-load current: what an open sweep with
  // thrust, power and rpm at seven speeds can separate (the fit below checks it is not degenerate).
  const parameters: FitParameter[] = ['liftFactor', 'cd0Factor', 'inducedFactor', 'escThrottleOffset', 'motorNoLoadCurrent'];
  let openPts: MeasuredPoint[];
  let ductPts: MeasuredPoint[];
  let fit: ReturnType<typeof fitOpenPredictDuct>['fit'];
  let openModel: RigModel;
  let ductModel: RigModel;
  beforeAll(() => {
    // Seeds of the bench's sensor noise.
    openPts = measureSweep(DEFAULT_OPEN_RIG, 3);
    ductPts = measureSweep(DEFAULT_DUCTED_RIG, 4);
    ({ fit, openModel, ductModel } = fitOpenPredictDuct(openRig, ductRig, openPts, { parameters }));
  });

  it('the sweeps are plausible bench data (thrust, power and rpm rise with throttle)', () => {
    for (const pts of [openPts, ductPts]) {
      for (let k = 1; k < pts.length; k++) {
        expect(pts[k].thrust_N).toBeGreaterThan(pts[k - 1].thrust_N);
        expect(pts[k].power_W!).toBeGreaterThan(pts[k - 1].power_W!);
        expect(pts[k].rpm!).toBeGreaterThan(pts[k - 1].rpm!);
      }
    }
  });

  it('calibration on the open sweep converges and improves the open residuals', () => {
    expect(fit.converged).toBe(true);
    expect(fit.degenerate, fit.degenerateReason ?? '').toBe(false);
    const before = deviations(buildRigModel(openRig), openPts);
    const after = deviations(openModel, openPts);
    const combined = (d: { thrust: number[]; power: number[]; rpm: number[] }): number => rms([...d.thrust, ...d.power, ...d.rpm]);
    console.log(
      [
        'open sweep, measured vs model, % (uncalibrated -> calibrated)',
        ` thrust RMS ${rms(before.thrust).toFixed(2)} -> ${rms(after.thrust).toFixed(2)}`,
        ` power  RMS ${rms(before.power).toFixed(2)} -> ${rms(after.power).toFixed(2)}`,
        ` rpm    RMS ${rms(before.rpm).toFixed(2)} -> ${rms(after.rpm).toFixed(2)}`,
        ` g/W    RMS ${rms(before.gpw).toFixed(2)} -> ${rms(after.gpw).toFixed(2)}`,
        ` fitted ${Object.entries(fit.parameters).map(([k, v]) => `${k}=${v!.toFixed(3)}`).join(' ')}`,
      ].join('\n'),
    );
    expect(combined(after)).toBeLessThan(combined(before));
    expect(rms(after.thrust)).toBeLessThan(rms(before.thrust));
    expect(rms(after.power)).toBeLessThan(rms(before.power));
    expect(rms(after.rpm)).toBeLessThan(rms(before.rpm));
    expect(fit.rmsPercent.thrust).toBeCloseTo(rms(after.thrust), 6);
  });

  it(`the calibrated model predicts the ducted grams per watt within ${WITHIN_PERCENT} % at every point of the sweep`, () => {
    const predicted = deviations(ductModel, ductPts);
    // The same calibrated propeller with a shroud realisation of 1 (the explicit duct losses only).
    const idealOpts: ModelOptions = { ...fit.modelOptions, ductLosses: { ...fit.modelOptions.ductLosses, shroudRealisation: 1 } };
    const ideal = deviations(buildRigModel(ductRig, idealOpts), ductPts);
    const rows = ductPts.map(
      (p, k) =>
        ` ${p.throttle.toFixed(1)}  ${newtonsToGramForce(p.thrust_N).toFixed(0).padStart(5)} gf ${p.power_W!.toFixed(1).padStart(6)} W` +
        `  ${(newtonsToGramForce(p.thrust_N) / p.power_W!).toFixed(2)} g/W  ${f1(ideal.gpw[k]).padStart(6)}  ${f1(predicted.gpw[k]).padStart(6)}` +
        `  ${f1(predicted.gpwEqualThrust[k]).padStart(6)}`,
    );
    console.log(
      [
        `ducted sweep: measured g/W vs prediction from the open calibration, % (shroud realisation ${DEFAULT_DUCT_LOSSES.shroudRealisation} by default)`,
        ' thr   thrust      power      measured   realis. 1   default  default at equal thrust',
        ...rows,
        ` max |dev|  realis. 1 ${maxAbs(ideal.gpw).toFixed(1)}  default ${maxAbs(predicted.gpw).toFixed(1)}`,
        ` RMS        realis. 1 ${rms(ideal.gpw).toFixed(1)}  default ${rms(predicted.gpw).toFixed(1)}`,
      ].join('\n'),
    );
    expect(ductModel.duct!.shroudRealisation).toBe(DEFAULT_DUCT_LOSSES.shroudRealisation);
    expect(maxAbs(predicted.gpw)).toBeLessThan(WITHIN_PERCENT);
    expect(maxAbs(predicted.gpwEqualThrust)).toBeLessThan(WITHIN_PERCENT);
    // The realisation loss is what moved the prediction onto the measurement, not noise.
    expect(rms(predicted.gpw)).toBeLessThan(rms(ideal.gpw));
  });

  it('the shroud realisation fitted on one ducted point predicts the rest, and agrees with the measured duct effectiveness', () => {
    const one = ductPts[3];
    const single = calibrate(ductRig, [one], { parameters: ['shroudRealisation'], model: fit.modelOptions });
    expect(single.converged).toBe(true);
    const eta = single.parameters.shroudRealisation!;
    const rest = deviations(buildRigModel(ductRig, single.modelOptions), ductPts.filter((p) => p !== one));
    const measured = ductEffectiveness(
      openPts.map((p) => ({ thrust_N: p.thrust_N, power_W: p.power_W! })),
      ductPts.map((p) => ({ thrust_N: p.thrust_N, power_W: p.power_W! })),
      { sigma: buildRigModel(ductRig).geometry.sigma!, ductMass_kg: ductRig.duct!.mass_kg },
    );
    console.log(
      `shroud realisation fitted on the ${one.throttle} point: ${eta.toFixed(3)} +- ${single.uncertainties.shroudRealisation!.toFixed(3)}; ` +
        `other points g/W max |dev| ${maxAbs(rest.gpw).toFixed(1)} %, RMS ${rms(rest.gpw).toFixed(1)} %; ` +
        `measured duct effectiveness (electrical saving over ideal) ${measured.effectiveness.toFixed(3)}`,
    );
    expect(eta).toBeGreaterThan(0);
    expect(eta).toBeLessThan(1);
    expect(maxAbs(rest.gpw)).toBeLessThan(WITHIN_PERCENT);
    // Both say the duct realises clearly less than the ideal saving.
    expect(measured.effectiveness).toBeGreaterThan(0);
    expect(measured.effectiveness).toBeLessThan(1);
  });
});

// ---------------------------------------------------------------------------------------------------------
// The same workflow across duct geometries: one open calibration, then for each duct a ducted sweep on the
// bench and the model's prediction with its default duct-loss coefficients. The bench's duct is a table of its
// own (server/sim/truth.ts), the model's a momentum balance with loss coefficients (server/model/
// duct-losses.ts); test/sim-independence.test.ts keeps them apart, so agreement here is earned.

interface DuctVariant {
  group: 'tip gap' | 'lip radius' | 'exit-area ratio';
  label: string;
  duct: NonNullable<RigSpec['duct']>;
}

const BASE_DUCT = DEFAULT_DUCTED_RIG.duct!;
const D_PROP = DEFAULT_DUCTED_RIG.propeller.diameter_m;
const R_PROP = D_PROP / 2;

function variants(): DuctVariant[] {
  const out: DuctVariant[] = [];
  const wall = BASE_DUCT.exit_diameter_m - BASE_DUCT.bore_diameter_m;
  for (const pct of [0.2, 0.63, 1, 2, 3, 5]) {
    // The same diffuser wall (exit minus bore) at every gap.
    const bore = D_PROP + 2 * R_PROP * (pct / 100);
    out.push({ group: 'tip gap', label: `${pct} % R`, duct: { ...BASE_DUCT, bore_diameter_m: bore, exit_diameter_m: bore + wall } });
  }
  for (const mm of [0, 5, 12, 18, 25, 35]) {
    out.push({ group: 'lip radius', label: `${mm} mm (${((mm / 1000 / R_PROP) * 100).toFixed(0)} % R)`, duct: { ...BASE_DUCT, inlet_lip_radius_m: mm / 1000 } });
  }
  for (const sigma of [1.013, 1.1, 1.2, 1.3, 1.45, 1.6]) {
    const exit = D_PROP * Math.sqrt(sigma);
    const half = (Math.atan((exit - BASE_DUCT.bore_diameter_m) / 2 / BASE_DUCT.length_m) * 180) / Math.PI;
    out.push({ group: 'exit-area ratio', label: `${sigma.toFixed(2)} (${half.toFixed(0)} deg, L 100 mm)`, duct: { ...BASE_DUCT, exit_diameter_m: exit } });
  }
  // A short duct: straight, and opened at 40 degrees half-angle.
  const short = 0.03;
  out.push({ group: 'exit-area ratio', label: `1.01 (straight, L 30 mm)`, duct: { ...BASE_DUCT, length_m: short, exit_diameter_m: BASE_DUCT.bore_diameter_m } });
  const wide = BASE_DUCT.bore_diameter_m + 2 * short * Math.tan((40 * Math.PI) / 180);
  out.push({ group: 'exit-area ratio', label: `${((wide / D_PROP) ** 2).toFixed(2)} (40 deg, L 30 mm)`, duct: { ...BASE_DUCT, length_m: short, exit_diameter_m: wide } });
  return out;
}

/** Power at a thrust from measured points, interpolated in log-log (thrust grows near power^(2/3)). */
function powerAtThrust(pts: readonly MeasuredPoint[], thrust: number): { power: number; voltage: number } {
  const s = [...pts].sort((a, b) => a.thrust_N - b.thrust_N);
  let k = 1;
  while (k < s.length - 1 && s[k].thrust_N < thrust) k++;
  const a = s[k - 1];
  const b = s[k];
  const t = (Math.log(thrust) - Math.log(a.thrust_N)) / (Math.log(b.thrust_N) - Math.log(a.thrust_N));
  return {
    power: Math.exp(Math.log(a.power_W!) + t * (Math.log(b.power_W!) - Math.log(a.power_W!))),
    voltage: a.busVoltage_V + t * (b.busVoltage_V - a.busVoltage_V),
  };
}

const PUBLISHED: Record<DuctVariant['group'], string> = {
  // Pereira 2008 (PhD thesis, University of Maryland) and Martin and Tung 2004 (AHS Forum 60): magnitudes
  // from memory, directions as published.
  'tip gap': 'tight gaps nearly free; most of the benefit gone within a few % of R (Pereira 2008; Martin and Tung 2004)',
  // Pereira 2008: performance still improving at the largest lip tested; Crane TP-410 entry loss 0.5 sharp,
  // 0.04 rounded (from memory).
  'lip radius': 'gain grows with lip radius over the tested range, no saturation at 10 % R (Pereira 2008)',
  // Pereira 2008; Pereira and Chopra, JAHS 54(1), 2009: optimum diffuser half-angle near 10 degrees.
  'exit-area ratio': 'optimum near 10 deg half-angle; a stalled diffuser costs thrust (Pereira 2008; Pereira and Chopra 2009)',
};

describe('model against the virtual bench across duct geometries (tip gap, lip radius, exit-area ratio)', () => {
  const THRUST = 8;
  const openRig = modelView(DEFAULT_OPEN_RIG);
  const parameters: FitParameter[] = ['liftFactor', 'cd0Factor', 'inducedFactor', 'escThrottleOffset', 'motorNoLoadCurrent'];
  interface Row {
    v: DuctVariant;
    bench: number;
    model: number;
    benchSaving: number;
    modelSaving: number;
    gpwDev: number[];
  }
  let rows: Row[];
  let benchOpen: number;
  let modelOpen: number;
  beforeAll(() => {
    const openPts = measureSweep(DEFAULT_OPEN_RIG, 31);
    const fit = calibrate(openRig, openPts, { parameters });
    const o = powerAtThrust(openPts, THRUST);
    benchOpen = o.power;
    modelOpen = predictAtThrusts(buildRigModel(openRig, fit.modelOptions), [THRUST], o.voltage)[0].operating!.powerElectrical_W;
    rows = variants().map((v, i) => {
      const benchRig: RigSpec = { ...DEFAULT_DUCTED_RIG, duct: v.duct };
      const pts = measureSweep(benchRig, 40 + i);
      const model = buildRigModel(modelView(benchRig), fit.modelOptions);
      const b = powerAtThrust(pts, THRUST);
      const m = predictAtThrusts(model, [THRUST], b.voltage)[0].operating!.powerElectrical_W;
      const gpwDev = pts.map((p) => deviation(model, p).percent.gramsPerWatt!);
      return { v, bench: b.power, model: m, benchSaving: 1 - b.power / benchOpen, modelSaving: 1 - m / modelOpen, gpwDev };
    });
    const pad = (s: string, n: number): string => s.padEnd(n);
    console.log(
      [
        `electrical power at ${THRUST} N on the Millrace Lab ducted rig, model (open calibration, default duct coefficients) vs bench`,
        ` open rotor: model ${modelOpen.toFixed(1)} W, bench ${benchOpen.toFixed(1)} W`,
        ` ${pad('group', 16)}${pad('duct', 26)}${pad('model W', 9)}${pad('bench W', 9)}${pad('model sav', 10)}${pad('bench sav', 10)}g/W max|dev| %`,
        ...rows.map(
          (r) =>
            ` ${pad(r.v.group, 16)}${pad(r.v.label, 26)}${pad(r.model.toFixed(1), 9)}${pad(r.bench.toFixed(1), 9)}` +
            `${pad((r.modelSaving * 100).toFixed(1) + ' %', 10)}${pad((r.benchSaving * 100).toFixed(1) + ' %', 10)}${maxAbs(r.gpwDev).toFixed(1)}`,
        ),
        ...Object.entries(PUBLISHED).map(([g, t]) => ` published, ${g}: ${t}`),
        ` over all ${rows.length} ducts and ${rows.length * THROTTLES.length} points: g/W max |dev| ${maxAbs(rows.flatMap((r) => r.gpwDev)).toFixed(1)} %, RMS ${rms(rows.flatMap((r) => r.gpwDev)).toFixed(1)} %`,
      ].join('\n'),
    );
  });

  const group = (g: DuctVariant['group']): Row[] => rows.filter((r) => r.v.group === g);

  it('model and bench agree that a wider tip gap costs power, and that most of the saving is gone by 5 % of the radius', () => {
    const g = group('tip gap');
    for (let k = 1; k < g.length; k++) {
      expect(g[k].model).toBeGreaterThan(g[k - 1].model);
      expect(g[k].bench).toBeGreaterThan(g[k - 1].bench);
    }
    for (const key of ['modelSaving', 'benchSaving'] as const) expect(g[g.length - 1][key]).toBeLessThan(0.5 * g[0][key]);
  });

  it('model and bench agree that a larger lip saves power, still beyond 10 % of the radius', () => {
    const g = group('lip radius');
    for (let k = 1; k < g.length; k++) {
      expect(g[k].model).toBeLessThanOrEqual(g[k - 1].model);
      expect(g[k].bench).toBeLessThanOrEqual(g[k - 1].bench);
    }
    // 18 mm (14 % R) to 35 mm (28 % R) still helps both.
    expect(g[5].model).toBeLessThan(g[3].model);
    expect(g[5].bench).toBeLessThan(g[3].bench);
  });

  it('model and bench agree that a stalled 40 degree diffuser is worse than a straight duct of the same length', () => {
    const g = group('exit-area ratio');
    const straight = g[g.length - 2];
    const stalled = g[g.length - 1];
    expect(stalled.model).toBeGreaterThan(straight.model);
    expect(stalled.bench).toBeGreaterThan(straight.bench);
    // And both find their best exit inside the range, not at its widest (an optimum, then stall).
    const attached = g.slice(0, 6);
    for (const key of ['model', 'bench'] as const) {
      const best = attached.reduce((a, b) => (b[key] < a[key] ? b : a));
      expect(best).not.toBe(attached[attached.length - 1]);
    }
  });

  it('the calibrated model predicts every ducted sweep within the re-measured figure', () => {
    // Re-measured against this bench when its duct became a table of its own (the 10 % of the earlier test
    // was against a bench that shared the model's duct formulas). The figure is the honest one, rounded up:
    // see the printed table.
    const all = rows.flatMap((r) => r.gpwDev);
    expect(maxAbs(all)).toBeLessThan(WITHIN_PERCENT);
  });
});
