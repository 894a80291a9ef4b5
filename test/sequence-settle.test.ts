// Settle detection on synthetic series (steady, ramping, noisy, a first-order approach), the regression it
// rests on, and the measurement of one operating point (statistics, grams per watt, figure of merit).

import { describe, expect, it } from 'vitest';
import type { Sample } from '../server/bench/telemetry.js';
import { DEFAULT_SETTLE, figureOfMerit, gramsPerWatt, judgeSettle, seriesStats, WindowMeasurement, type SettleReading } from '../server/sequence/index.js';
import type { PlannedStep } from '../server/sequence/index.js';
import { Prng } from '../server/sim/index.js';

const T0 = 1_760_000_000_000; // epoch milliseconds, as the daemon stamps samples

/** Gaussian noise from the project's seeded generator (Box-Muller), so a failure reproduces. */
function gauss(rng: Prng): number {
  const u = Math.max(1e-12, rng.next());
  return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * rng.next());
}

/**
 * Readings as the bench gives them: thrust at 80 /s, current at 500 /s, each on its own rows (a row holds
 * null for a channel not sampled in it).
 */
function series(durationS: number, thrust: (t: number) => number, current: ((t: number) => number) | null, noise: { thrust: number; current: number }, seed = 1, t0 = T0): SettleReading[] {
  const rng = new Prng(seed);
  const out: SettleReading[] = [];
  for (let k = 0; k < durationS * 500; k++) {
    const t = k / 500;
    const withThrust = k % 6 === 0; // 83 /s, near the load cell's 80
    out.push({
      t: t0 + t * 1000,
      thrust: withThrust ? thrust(t) + noise.thrust * gauss(rng) : null,
      current: current ? current(t) + noise.current * gauss(rng) : null,
    });
  }
  return out;
}

describe('settle criterion', () => {
  const P = DEFAULT_SETTLE;

  it('calls a level series with bench-like noise steady', () => {
    const r = judgeSettle(series(P.window_s, () => 5, () => 10, { thrust: 0.02, current: 0.06 }), P);
    expect(r.why).toBe('');
    expect(r.steady).toBe(true);
    expect(r.thrust!.n).toBeGreaterThanOrEqual(35);
    expect(r.thrust!.mean).toBeCloseTo(5, 1);
    expect(r.current!.n).toBe(250);
  });

  it('refuses a smooth ramp on its slope even though its spread is small', () => {
    // 0.6 N/s over 0.5 s spreads the readings by only about 0.09 N std, inside 0.02 x 5 N = 0.1 N
    const r = judgeSettle(series(P.window_s, (t) => 5 + 0.6 * t, () => 10, { thrust: 0.005, current: 0.06 }), P);
    expect(r.steady).toBe(false);
    expect(r.thrust!.std).toBeLessThan(r.thrust!.stdLimit);
    expect(r.thrust!.slope).toBeCloseTo(0.6, 1);
    expect(r.why).toMatch(/^thrust slope 0\.\d+ N\/s >= 0\.250$/);
  });

  it('refuses a level but noisy series on its spread', () => {
    const r = judgeSettle(series(P.window_s, () => 5, () => 10, { thrust: 0.3, current: 0.06 }, 3), P);
    expect(r.steady).toBe(false);
    expect(r.thrust!.std).toBeGreaterThan(r.thrust!.stdLimit);
    expect(r.thrust!.stdLimit).toBeCloseTo(0.02 * r.thrust!.mean, 12); // the relative term binds at 5 N
    expect(r.why).toMatch(/^thrust std 0\.\d+ N >= 0\.\d+/);
  });

  it('judges current too: a drifting current holds off an otherwise steady point', () => {
    // 1 A/s spreads 0.5 s of readings by 0.14 A std (inside 0.3 A) but is above max(0.6, 0.06 x 10.25) A/s
    const r = judgeSettle(series(P.window_s, () => 5, (t) => 10 + 1 * t, { thrust: 0.01, current: 0.02 }), P);
    expect(r.thrust!.steady).toBe(true);
    expect(r.current!.steady).toBe(false);
    expect(r.why).toMatch(/^current slope/);
  });

  it('judges thrust alone when the rig has no current sensor, and needs enough thrust readings', () => {
    expect(judgeSettle(series(P.window_s, () => 5, null, { thrust: 0.01, current: 0 }), P)).toMatchObject({ steady: true, current: null });
    const few = series(0.02, () => 5, () => 10, { thrust: 0, current: 0 });
    const r = judgeSettle(few, P);
    expect(r.steady).toBe(false);
    expect(r.why).toMatch(/thrust: \d readings, need 5/);
  });

  it('on a first-order approach, becomes steady only once the slope has decayed below its limit', () => {
    // x(t) = 8 (1 - exp(-t / tau)): the slope at t is 8 / tau exp(-t / tau). With tau = 0.4 s the slope
    // falls below max(0.25, 0.04 x 8 = 0.32) N/s at t = tau ln(8 / (tau x 0.32)) = 1.65 s (derived). A
    // window's regression slope is about the slope at its middle, so the first steady window ends near
    // 1.65 + 0.25 = 1.9 s.
    const tau = 0.4;
    const all = series(4, (t) => 8 * (1 - Math.exp(-t / tau)), null, { thrust: 0.01, current: 0 }, 5);
    let firstSteadyEnd: number | null = null;
    for (let end = P.window_s; end <= 4; end += 0.025) {
      const w = all.filter((r) => r.t >= T0 + (end - P.window_s) * 1000 && r.t < T0 + end * 1000);
      if (judgeSettle(w, P).steady) {
        firstSteadyEnd = end;
        break;
      }
    }
    expect(firstSteadyEnd).not.toBeNull();
    expect(firstSteadyEnd!).toBeGreaterThan(1.75);
    expect(firstSteadyEnd!).toBeLessThan(2.1);
  });
});

describe('regression', () => {
  it('recovers an exact line at epoch-millisecond times without losing precision', () => {
    const t = Array.from({ length: 50 }, (_, i) => (T0 + i * 12.5) / 1000);
    const x = t.map((ti) => 3 + 0.75 * (ti - t[0]));
    const s = seriesStats(t, x);
    expect(s.slope).toBeCloseTo(0.75, 9);
    expect(s.mean).toBeCloseTo(3 + 0.75 * ((49 * 12.5) / 2000), 9);
  });

  it('gives the sample standard deviation (n - 1)', () => {
    // {1, 2, 3, 4}: variance 5/3 (n - 1 form), std 1.290994
    expect(seriesStats([0, 1, 2, 3], [1, 2, 3, 4]).std).toBeCloseTo(1.290994, 6);
    expect(seriesStats([0], [2])).toMatchObject({ n: 1, std: 0, slope: 0 });
  });
});

describe('measurement of one point', () => {
  it('grams per watt: 1 kgf of thrust for 100 W is 10 g/W', () => {
    // 1 gram-force = 9.80665e-3 N (CGPM 1901 standard gravity; ../shared/CHECKS.md)
    expect(gramsPerWatt(9.80665, 100)).toBeCloseTo(10, 12);
    expect(gramsPerWatt(1, 0.1)).toBeNull(); // idle power: the ratio is noise
    expect(gramsPerWatt(null, 100)).toBeNull();
  });

  it('figure of merit matches momentum theory: FM = 1 at the ideal power', () => {
    // Worked example (../shared/CHECKS.md, derived from momentum theory, Leishman): T = 5 N, D = 0.254 m,
    // rho = 1.225 kg/m^3 -> ideal open-rotor power 31.73 W. At that power FM = 1; at twice it, 0.5.
    const A = (Math.PI * 0.254 ** 2) / 4;
    expect(figureOfMerit(5, 31.73, 1.225, A)).toBeCloseTo(1, 3);
    expect(figureOfMerit(5, 2 * 31.73, 1.225, A)).toBeCloseTo(0.5, 3);
    expect(figureOfMerit(5, 31.73, 1.225, null)).toBeNull();
    expect(figureOfMerit(-0.2, 31.73, 1.225, A)).toBeNull();
  });

  const step: PlannedStep = { index: 2, throttle: 0.5, ramp_s: 1, hold_s: 3, window_s: 1, origin: 'steps[2].throttle', originValue: 0.5, direction: 'down', label: 'mid', pass: [1] };
  const sample = (t: number, thrust: number | null, v: number, i: number, temp: number | null = null): Sample => ({
    t,
    dt: 0,
    thrust,
    voltage: v,
    current: i,
    power: v * i,
    rpm: null,
    temp,
    torque: null,
    out: 0.5,
  });

  it('takes statistics of every channel inside the window, ignoring readings before it', () => {
    const m = new WindowMeasurement(T0);
    m.add(sample(T0 - 5, 100, 99, 99)); // before the window: must not count
    m.add(sample(T0, 4, 15, 10, 40));
    m.add(sample(T0 + 10, null, 15, 12));
    m.add(sample(T0 + 20, 6, 15, 14, 42));
    const p = m.finish(step, T0 + 1000, true, 0.7, { airDensity_kg_m3: 1.225, diskArea_m2: null, predict: null });
    expect(p.channels.thrust).toEqual({ mean: 5, std: Math.SQRT2, n: 2, min: 4, max: 6 });
    expect(p.channels.current!.mean).toBeCloseTo(12, 12);
    expect(p.channels.power!.mean).toBeCloseTo(180, 12);
    expect(p.channels.temp!.n).toBe(2);
    expect(p.channels.rpm).toBeUndefined();
    expect(p.grams_per_watt).toBeCloseTo(5 / 9.80665e-3 / 180, 9);
    expect(p).toMatchObject({ index: 2, throttle: 0.5, t_start: T0, t_end: T0 + 1000, settled: true, settle_s: 0.7, direction: 'down', label: 'mid', pass: [1], figure_of_merit: null, predicted: null, deviation_pct: null });
  });

  it('compares with a predictor when one is given', () => {
    const m = new WindowMeasurement(T0);
    m.add(sample(T0, 5, 15, 12));
    const calls: [number, number][] = [];
    const p = m.finish(step, T0 + 1000, false, 3, {
      airDensity_kg_m3: 1.225,
      diskArea_m2: 0.05,
      predict: (thr, v) => {
        calls.push([thr, v]);
        return { thrust_N: 6, power_W: 170, grams_per_watt: 3 };
      },
    });
    expect(calls).toEqual([[0.5, 15]]);
    const gpw = 5 / 9.80665e-3 / 180;
    expect(p.deviation_pct).toBeCloseTo(((gpw - 3) / 3) * 100, 9);
    expect(p.predicted).toEqual({ thrust_N: 6, power_W: 170, grams_per_watt: 3 });
    expect(p.figure_of_merit).toBeCloseTo(5 ** 1.5 / (180 * Math.sqrt(2 * 1.225 * 0.05)), 9);
    expect(p.settled).toBe(false);
  });
});
