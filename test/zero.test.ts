// The at-rest judgement of the zero step and the drift verdict (server/bench/zero.ts), on generated readings:
// a quiet cell passes, a swinging or creeping one and a turning rotor are refused with the reason, too few
// readings are refused, and the drift is judged against the run's thrust range with a noise floor.

import { describe, expect, it } from 'vitest';
import { DEFAULT_ZERO_RULES, judgeDrift, judgeRest, type RestReading } from '../server/bench/zero.js';
import { Prng } from '../server/sim/prng.js';

const rules = DEFAULT_ZERO_RULES;

/** One second at `hz` of thrust f(t) plus Gaussian noise of `noise` N. */
function window(f: (t_s: number) => number, noise: number, hz = 80, rpm: number | null = null, seed = 3): RestReading[] {
  const rng = new Prng(seed);
  const out: RestReading[] = [];
  for (let i = 0; i < hz * rules.window_s; i++) {
    const t = i / hz;
    out.push({ t: 1_700_000_000_000 + t * 1000, thrust: f(t) + noise * rng.gauss(), rpm });
  }
  return out;
}

describe('judgeRest', () => {
  it('takes a quiet cell with an offset as a zero, at 80 and at 10 samples a second', () => {
    for (const hz of [80, 10]) {
      const v = judgeRest(window(() => 0.8, 0.008, hz), rules, 8);
      expect(v.steady, v.why).toBe(true);
      expect(v.mean_N).toBeCloseTo(0.8, 2);
      expect(v.n).toBe(hz);
    }
  });

  it('refuses a swinging force (a draught, a hand on the stand) and says why', () => {
    const v = judgeRest(window((t) => 0.8 + 0.3 * Math.sin(2 * Math.PI * 1.7 * t), 0.008), rules, 8);
    expect(v.steady).toBe(false);
    expect(v.why).toMatch(/not steady/);
    expect(v.why).toMatch(/wind|draught/);
    expect(v.why).toMatch(/touching/);
  });

  it('refuses a smooth creep that the spread alone would pass', () => {
    // 0.1 N/s over one second: a spread of about 0.03 N (1/sqrt(12) of 0.1), at the limit; the slope is not.
    const v = judgeRest(window((t) => 0.8 + 0.1 * t, 0.002), rules, null);
    expect(v.steady).toBe(false);
    expect(v.why).toMatch(/drifting 0\.1\d\d N\/s/);
  });

  it('refuses while the rotor turns, and with too few readings', () => {
    expect(judgeRest(window(() => 0.8, 0.008, 80, 900), rules, 8).why).toMatch(/still turning \(900 rpm\)/);
    const few = judgeRest(window(() => 0.8, 0.008, 80).slice(0, 3), rules, 8);
    expect(few.steady).toBe(false);
    expect(few.why).toMatch(/only 3 thrust readings/);
  });

  it('widens its limits with the thrust the stand is expected to reach', () => {
    // 0.05 N of noise: too much for a small stand, honest noise for a 30 N one (0.004 x 30 = 0.12 N).
    const noisy = window(() => 2, 0.05);
    expect(judgeRest(noisy, rules, 5).steady).toBe(false);
    expect(judgeRest(noisy, rules, 30).steady).toBe(true);
  });
});

describe('judgeDrift', () => {
  it('warns above the fraction of the run range, not below', () => {
    expect(judgeDrift(0.05, 8, rules)).toMatchObject({ warned: false, limit_N: 0.08 });
    const w = judgeDrift(-0.12, 8, rules);
    expect(w.warned).toBe(true);
    expect(w.fraction).toBeCloseTo(0.015, 6);
  });

  it('never warns below the noise floor, and has no fraction without a range', () => {
    const v = judgeDrift(0.008, 0, rules);
    expect(v).toMatchObject({ warned: false, fraction: null, limit_N: rules.drift_floor_N });
    expect(judgeDrift(0.02, 0, rules).warned).toBe(true);
  });
});
