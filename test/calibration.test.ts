// Calibration: the least-squares fit against a general-purpose statistics library, the span workflow on the
// virtual bench (whose load cell has its own gain error and preload offset), refusal of an implausible fit,
// the current zero and voltage scale against reference readings, and the history with its staleness warnings.

import { mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { linearRegression, rSquared } from 'simple-statistics';
import { afterEach, describe, expect, it } from 'vitest';
import { fitLine, fitSpan, FitRefused } from '../server/calibration/fit.js';
import { CalibrationHistory, calibrationWarnings, HISTORY_FILE } from '../server/calibration/history.js';
import { CalibrationError, CalibrationWorkflows, G0 } from '../server/calibration/workflows.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { applyCalibration } from '../server/bench/calibration.js';

const dirs: string[] = [];
const daemons: RunningDaemon[] = [];
afterEach(async () => {
  for (const d of daemons.splice(0)) await d.close();
  for (const d of dirs.splice(0)) rmSync(d, { recursive: true, force: true });
});
const tmp = () => {
  const d = mkdtempSync(join(tmpdir(), 'ductbench-cal-'));
  dirs.push(d);
  return d;
};

describe('least-squares line fit', () => {
  it('agrees with simple-statistics (registry library) on slope, intercept and r^2', () => {
    // reference: simple-statistics 7.12.1 linearRegression / rSquared, a general-purpose numeric library
    let seed = 7;
    const rnd = () => ((seed = (seed * 1103515245 + 12345) % 2 ** 31) / 2 ** 31 - 0.5);
    for (let trial = 0; trial < 20; trial++) {
      const slope = 0.8 + 0.4 * (rnd() + 0.5);
      const offset = rnd() * 2;
      const pts = Array.from({ length: 3 + trial }, (_, i) => {
        const x = i * 1.7 + rnd();
        return { x, y: slope * x + offset + rnd() * 0.01 };
      });
      const mine = fitLine(pts);
      const ref = linearRegression(pts.map((p) => [p.x, p.y]));
      expect(mine.slope).toBeCloseTo(ref.m, 10);
      expect(mine.offset).toBeCloseTo(ref.b, 10);
      const r2 = rSquared(pts.map((p) => [p.x, p.y]), (x) => ref.m * x + ref.b);
      expect(mine.r2).toBeCloseTo(r2, 10);
    }
  });

  it('reports residuals and non-linearity, and standard errors only with degrees of freedom left', () => {
    const two = fitLine([{ x: 0, y: 0 }, { x: 1, y: 2 }]);
    expect(two.slopeStd).toBeNull();
    const bent = fitLine([{ x: 0, y: 0 }, { x: 1, y: 1 }, { x: 2, y: 2.2 }, { x: 3, y: 3 }]);
    expect(bent.residuals).toHaveLength(4);
    expect(bent.nonLinearityPct).toBeGreaterThan(2);
    expect(bent.slopeStd).toBeGreaterThan(0);
  });

  it('refuses degenerate and implausible spans', () => {
    expect(() => fitLine([{ x: 1, y: 0 }])).toThrow(FitRefused);
    expect(() => fitLine([{ x: 1, y: 0 }, { x: 1, y: 5 }])).toThrow(/do not change/);
    // gain far from 1: a mass entered in grams instead of kilograms
    expect(() => fitSpan([{ x: 0, y: 0 }, { x: 4.9, y: 4903 }])).toThrow(/gain/);
    // one reading far off the line
    expect(() => fitSpan([{ x: 0, y: 0 }, { x: 1, y: 1 }, { x: 2, y: 2.3 }, { x: 3, y: 3 }])).toThrow(/non-linearity/);
  });

  it('standard gravity is 9.80665 m/s^2 (CGPM 1901; ISO 80000-3)', () => {
    expect(G0).toBe(9.80665);
  });
});

describe('calibration workflows on the virtual bench', () => {
  async function bench() {
    const d = await startDaemon({ source: { kind: 'sim', seed: 5 }, httpPort: 0, log: () => {} });
    daemons.push(d);
    await d.firstConnect;
    const history = new CalibrationHistory(tmp());
    const wf = new CalibrationWorkflows({ link: d.link, controller: d.controller }, history, { settleMs: 200, measureSeconds: 0.6 });
    return { d, wf, history };
  }

  it('tare then a three-mass span corrects the load cell to within 0.3 % of a check mass', async () => {
    const { d, wf, history } = await bench();
    await wf.tare();
    const entry = await wf.span([0.2, 0.5, 1.0], async (kg) => d.sim!.hangMass(kg));
    expect(entry.points).toHaveLength(4); // the empty cell plus three masses
    expect(entry.nonLinearityPct).toBeLessThan(0.5);
    // the bench's cell reads 1.2 % high (its own gain error): the fit undoes that
    expect(entry.result.scale).toBeGreaterThan(0.97);
    expect(entry.result.scale).toBeLessThan(1.0);
    // a check mass not used in the fit
    d.sim!.hangMass(0.7);
    const raw = await wf.measure('thrust', 1.5);
    const corrected = applyCalibration(history.current().thrust, raw.mean);
    expect(Math.abs(corrected - 0.7 * G0) / (0.7 * G0)).toBeLessThan(0.003);
    d.sim!.hangMass(0);
  });

  it('refuses a span where the mass hung is not the mass entered', async () => {
    const { d, wf, history } = await bench();
    await wf.tare();
    // the operator enters 1.0 kg but hangs 0.6 kg on the last step
    const err = await wf.span([0.2, 0.5, 1.0], async (kg) => d.sim!.hangMass(kg === 1.0 ? 0.6 : kg)).catch((e: unknown) => e);
    expect(err).toBeInstanceOf(CalibrationError);
    expect((err as Error).message).toMatch(/non-linearity/);
    expect(history.all.filter((e) => e.kind === 'span')).toHaveLength(0); // nothing applied
  });

  it('current zero removes the sensor offset; voltage scale matches a reference reading', async () => {
    const { d, wf, history } = await bench();
    const z = await wf.currentZero();
    expect(Math.abs(z.result.offset)).toBeGreaterThan(0.01); // the Hall sensor reads something at rest
    const rest = await wf.measure('current', 1);
    expect(Math.abs(applyCalibration(history.current().current, rest.mean))).toBeLessThan(0.05);
    // the multimeter reading: the bench's true bus voltage
    const truthV = d.sim!.truth.busVoltageV;
    await wf.scaleAgainst('voltage', truthV);
    const v = await wf.measure('voltage', 1);
    expect(applyCalibration(history.current().voltage, v.mean)).toBeCloseTo(d.sim!.truth.busVoltageV, 1);
  });

  it('calibration needs a disarmed bench', async () => {
    const { d, wf } = await bench();
    await d.controller.arm();
    await expect(wf.currentZero()).rejects.toThrow(/disarmed/);
  });
});

describe('calibration history', () => {
  it('persists atomically, gives the latest per channel, and warns when old or made at another temperature', () => {
    const dir = tmp();
    const h = new CalibrationHistory(dir);
    expect(calibrationWarnings(h, new Date(), null)[0]).toMatch(/no span calibration/);
    h.add({ at: '2026-10-01T00:00:00.000Z', channel: 'thrust', kind: 'span', result: { scale: 0.99, offset: 0.01 }, temperatureC: 21 });
    h.add({ at: '2026-11-20T10:00:00.000Z', channel: 'rpm', kind: 'pulses_per_rev', result: { scale: 0.5, offset: 0 } });
    const again = new CalibrationHistory(dir);
    expect(again.current().thrust).toEqual({ scale: 0.99, offset: 0.01 });
    expect(again.current().rpm.scale).toBe(0.5);
    expect(again.current().voltage).toEqual({ scale: 1, offset: 0 });
    const w = calibrationWarnings(again, new Date('2026-12-01T00:00:00Z'), 35);
    expect(w.some((s) => /61 days old/.test(s))).toBe(true);
    expect(w.some((s) => /moved 14\.0 °C/.test(s))).toBe(true);
    expect(calibrationWarnings(again, new Date('2026-10-05T00:00:00Z'), 22)).toEqual([]);
    expect(JSON.parse(readFileSync(join(dir, HISTORY_FILE), 'utf8')).entries).toHaveLength(2);
  });
  it('a corrupt history file is an error naming the file, not a silent reset', () => {
    const dir = tmp();
    writeFileSync(join(dir, HISTORY_FILE), '{ not json');
    expect(() => new CalibrationHistory(dir)).toThrow(/calibration\.json is not valid JSON/);
  });
});
