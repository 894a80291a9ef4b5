// A new mount re-points the interlocks: the propeller's diameter (blade-tip Mach), the pack's cells (per-cell
// voltage) and the limits in force judge from the next sample on, with nothing carried over from the old
// hardware's readings.

import { describe, expect, it } from 'vitest';
import type { BenchState } from '../server/api/messages.js';
import type { Sample } from '../server/bench/telemetry.js';
import { Interlocks } from '../server/interlocks/engine.js';
import { DEFAULT_LIMITS } from '../server/interlocks/limits.js';

class FakeBench {
  state: BenchState = 'running';
  trips: { rule: string; value: number; limit: number }[] = [];
  trip(rule: string, value: number, limit: number): void {
    this.trips.push({ rule, value, limit });
    this.state = 'tripped';
  }
}

function harness() {
  const bench = new FakeBench();
  let now = 0;
  const il = new Interlocks(bench, { limits: { ...DEFAULT_LIMITS }, diameterM: 0.254, cells: 4, badLineCount: () => 0, now: () => now, tickMs: 0 });
  const base: Sample = { t: 0, dt: 0, thrust: 5, voltage: 15.5, current: 10, power: 155, rpm: 12_000, temp: 40, torque: null, out: 0.5 };
  const feed = (over: Partial<Sample>, ms = 200) => {
    for (let t = 0; t < ms; t += 2) {
      now += 2;
      il.onSample({ ...base, ...over, t: now, dt: now / 1000 }, now);
    }
  };
  return { bench, il, feed };
}

describe('interlocks after a new mount', () => {
  it('judge blade-tip Mach by the new propeller', () => {
    // Tip speed = pi D n: 12,000 rpm on 0.254 m is 159.6 m/s, Mach 0.47 at 340.3 m/s (ISA sea level, ISO 2533);
    // on 0.40 m it is 251.3 m/s, Mach 0.74, above the 0.7 trip.
    const h = harness();
    h.feed({});
    expect(h.bench.trips).toEqual([]);
    h.bench.state = 'safe';
    h.il.remount({ limits: { ...DEFAULT_LIMITS }, diameterM: 0.4, cells: 4, predictor: null });
    h.bench.state = 'running';
    h.feed({});
    expect(h.bench.trips.map((t) => t.rule)).toEqual(['tip_mach']);
    expect(h.bench.trips[0].value).toBeCloseTo((12_000 / 60) * Math.PI * 0.4 / Math.sqrt(1.4 * 287.05287 * 288.15), 6);
  });

  it('judge the pack by the new supply\'s cells and a part\'s stricter limit', () => {
    const h = harness();
    // 15.5 V on 4 cells is 3.88 V a cell: fine; on 5 cells 3.1 V, below the 3.3 V floor (common practice)
    h.feed({});
    h.bench.state = 'safe';
    h.il.remount({ limits: { ...DEFAULT_LIMITS }, diameterM: 0.254, cells: 5, predictor: null });
    h.bench.state = 'running';
    h.feed({});
    expect(h.bench.trips.map((t) => t.rule)).toEqual(['min_pack_voltage']);

    const k = harness();
    k.bench.state = 'safe';
    k.il.remount({ limits: { ...DEFAULT_LIMITS, max_current_a: 8 }, diameterM: 0.254, cells: 4, predictor: null });
    k.bench.state = 'running';
    k.feed({});
    expect(k.bench.trips).toMatchObject([{ rule: 'max_current', value: 10, limit: 8 }]);
    expect(k.il.limits.max_current_a).toBe(8);
  });
});
