// Each host interlock rule on synthetic samples: it trips past its limit (after the debounce), warns before
// it, stays quiet inside it, and does nothing where it must not (bench not energised, already tripped).

import { describe, expect, it } from 'vitest';
import type { BenchState } from '../server/api/messages.js';
import type { Sample } from '../server/bench/telemetry.js';
import { Interlocks, type InterlockOptions } from '../server/interlocks/engine.js';
import { DEFAULT_LIMITS, LimitsError, parseLimits, type Limits } from '../server/interlocks/limits.js';
import { RULES } from '../server/interlocks/rules.js';

class FakeBench {
  state: BenchState = 'running';
  trips: { rule: string; value: number; limit: number; detail: string }[] = [];
  trip(rule: string, value: number, limit: number, detail: string): void {
    this.trips.push({ rule, value, limit, detail });
    this.state = 'tripped';
  }
}

function harness(limits: Partial<Limits> = {}, extra: Partial<InterlockOptions> = {}) {
  const bench = new FakeBench();
  let now = 0;
  let bad = 0;
  const il = new Interlocks(bench, {
    limits: { ...DEFAULT_LIMITS, ...limits },
    diameterM: 0.254,
    cells: 4,
    badLineCount: () => bad,
    now: () => now,
    tickMs: 0,
    ...extra,
  });
  const warnings: string[] = [];
  il.on('warning', (w) => warnings.push(w.rule));
  const base: Sample = { t: 0, dt: 0, thrust: 5, voltage: 15.5, current: 10, power: 155, rpm: 7000, temp: 40, torque: null, out: 0.5 };
  /** Feeds samples every `stepMs` for `ms`. */
  const feed = (over: Partial<Sample>, ms = 200, stepMs = 2) => {
    for (let t = 0; t < ms; t += stepMs) {
      now += stepMs;
      il.onSample({ ...base, ...over, t: now, dt: now / 1000 }, now);
    }
  };
  return { bench, il, feed, warnings, advance: (ms: number) => (now += ms), addBad: (n: number) => (bad += n), tick: () => il.tick() };
}

describe('limits configuration', () => {
  it('defaults are sane and every rule has a name and a reason', () => {
    expect(parseLimits(undefined)).toEqual(DEFAULT_LIMITS);
    const names = RULES.map((r) => r.name);
    expect(new Set(names).size).toBe(names.length);
    for (const r of RULES) expect(r.reason.length).toBeGreaterThan(20);
  });
  it('refuses unknown keys, non-numbers and out-of-range values, naming the key', () => {
    expect(() => parseLimits({ max_curent_a: 30 })).toThrow(/limits\.max_curent_a: unknown limit/);
    expect(() => parseLimits({ max_current_a: '30' })).toThrow(/max_current_a: must be a finite number/);
    expect(() => parseLimits({ max_current_a: -1 })).toThrow(/max_current_a: -1 is outside/);
    expect(() => parseLimits({ tip_mach_warn: 0.8, tip_mach_trip: 0.6 })).toThrow(LimitsError);
    expect(() => parseLimits({ cells: 3.5 })).toThrow(/whole number/);
    expect(parseLimits({ max_current_a: 25 }).max_current_a).toBe(25);
  });
});

describe('sample rules', () => {
  const cases: [string, Partial<Limits>, Partial<Sample>, Partial<Sample>][] = [
    // rule, limits, a sample inside, a sample past the limit
    ['max_current', { max_current_a: 30 }, { current: 20 }, { current: 31 }],
    ['max_power', { max_power_w: 300 }, { power: 200 }, { power: 320 }],
    ['max_thrust', { max_thrust_n: 10 }, { thrust: 6 }, { thrust: 10.5 }],
    ['max_rpm', { max_rpm: 9000 }, { rpm: 7000 }, { rpm: 9100 }],
    ['max_temp', { max_temp_c: 80 }, { temp: 50 }, { temp: 81 }],
    ['tip_mach', { tip_mach_trip: 0.4, tip_mach_warn: 0.35 }, { rpm: 7000 }, { rpm: 11000 }], // 0.254 m at 11000 rpm: 146 m/s, Mach 0.43
    ['min_pack_voltage', { min_cell_v: 3.3, cell_warn_v: 3.5 }, { voltage: 15.5 }, { voltage: 13.0 }], // 4 cells: 13.2 V
  ];
  for (const [rule, limits, inside, past] of cases) {
    it(`${rule}: quiet inside, trips past the limit after the debounce`, () => {
      const h = harness(limits);
      h.feed(inside, 300);
      expect(h.bench.trips).toEqual([]);
      h.feed(past, 10); // shorter than the 30 ms debounce
      expect(h.bench.trips).toEqual([]);
      h.feed(past, 40);
      expect(h.bench.trips.map((t) => t.rule)).toEqual([rule]);
      expect(h.bench.trips[0].detail.length).toBeGreaterThan(5);
      expect(Number.isFinite(h.bench.trips[0].value) && Number.isFinite(h.bench.trips[0].limit)).toBe(true);
    });
  }

  it('a single noisy sample past a limit does not trip (debounce)', () => {
    const h = harness({ max_current_a: 30 });
    for (let i = 0; i < 50; i++) {
      h.feed({ current: 20 }, 20);
      h.feed({ current: 35 }, 2);
    }
    expect(h.bench.trips).toEqual([]);
  });

  it('warns near a limit before tripping, at most once per two seconds', () => {
    const h = harness({ max_current_a: 30 });
    h.feed({ current: 28 }, 1000);
    expect(h.warnings.filter((w) => w === 'max_current')).toHaveLength(1);
    h.feed({ current: 28 }, 1500);
    expect(h.warnings.filter((w) => w === 'max_current')).toHaveLength(2);
    expect(h.bench.trips).toEqual([]);
  });

  it('tip Mach at standard sea-level temperature: speed of sound 340.3 m/s', () => {
    // a = sqrt(gamma R T) = sqrt(1.4 * 287.05287 * 288.15) = 340.29 m/s (ISA sea level, ISO 2533)
    const h = harness({ tip_mach_trip: 0.5, tip_mach_warn: 0.45 });
    const rpmAtMach05 = (0.5 * 340.294 * 60) / (Math.PI * 0.254);
    h.feed({ rpm: rpmAtMach05 * 0.995 }, 100);
    expect(h.bench.trips).toEqual([]);
    h.feed({ rpm: rpmAtMach05 * 1.005 }, 100);
    expect(h.bench.trips[0]?.rule).toBe('tip_mach');
  });

  it('pack voltage: infers the cell count from the resting voltage when not given', () => {
    const h = harness({}, { cells: null });
    h.bench.state = 'safe';
    h.feed({ voltage: 16.6, out: 0 }, 50); // a charged 4-cell pack at rest
    expect(h.il.knownCells).toBe(4);
    h.bench.state = 'running';
    h.feed({ voltage: 12.9 }, 100);
    expect(h.bench.trips[0]?.rule).toBe('min_pack_voltage');
  });

  it('vibration: a steady ramp is not vibration, a fluctuating thrust is', () => {
    const h = harness({ vibration_std_n: 0.5 });
    h.feed({ thrust: 5 }, 1500, 12.5); // settle at 80 Hz
    // a smooth ramp in thrust at constant output is a trend, not fluctuation
    for (let i = 0; i < 80; i++) h.feed({ thrust: 5 + i * 0.02 }, 12.5, 12.5);
    expect(h.bench.trips).toEqual([]);
    for (let i = 0; i < 80; i++) h.feed({ thrust: 6.6 + (i % 2 ? 1 : -1) }, 12.5, 12.5);
    expect(h.bench.trips[0]?.rule).toBe('vibration');
  });

  it('thrust at zero throttle: trips when armed, only warns when disarmed', () => {
    const armed = harness({ zero_throttle_thrust_n: 0.5 });
    armed.bench.state = 'armed';
    armed.feed({ out: 0, thrust: 0.2 }, 2000);
    expect(armed.bench.trips).toEqual([]);
    armed.feed({ out: 0, thrust: 0.9 }, 100);
    expect(armed.bench.trips[0]?.rule).toBe('thrust_at_zero_throttle');
    const safe = harness({ zero_throttle_thrust_n: 0.5 });
    safe.bench.state = 'safe';
    safe.feed({ out: 0, thrust: 0.9 }, 2000);
    expect(safe.bench.trips).toEqual([]);
    expect(safe.warnings).toContain('thrust_at_zero_throttle');
  });

  it('prediction deviation: warns past the warning level and trips past the trip level once steady', () => {
    // predicted 10 g/W; measured 5 N / (9.80665e-3 N/gf) / 155 W = 3.29 g/W: 67 % low
    const h = harness({ deviation_warn_pct: 15, deviation_trip_pct: 40 }, { predictor: () => ({ gramsPerWatt: 10, thrust_N: 5 }) });
    h.feed({}, 1000); // not yet steady: no verdict
    expect(h.bench.trips).toEqual([]);
    h.feed({}, 1500);
    expect(h.bench.trips[0]?.rule).toBe('prediction_deviation');
    expect(h.bench.trips[0].value).toBeCloseTo(-67.1, 0);
    const w = harness({ deviation_warn_pct: 15, deviation_trip_pct: 80 }, { predictor: () => ({ gramsPerWatt: 4, thrust_N: 5 }) });
    w.feed({}, 3000); // 3.29 vs 4: -18 %
    expect(w.bench.trips).toEqual([]);
    expect(w.warnings).toContain('prediction_deviation');
  });

  it('prediction deviation: no verdict where the predicted thrust is below the judging floor (near idle)', () => {
    const h = harness({ deviation_warn_pct: 15, deviation_trip_pct: 40 }, { predictor: () => ({ gramsPerWatt: 10, thrust_N: 0.8 }), deviationMinThrustN: 2 });
    h.feed({}, 3000);
    expect(h.bench.trips).toEqual([]);
    expect(h.warnings).not.toContain('prediction_deviation');
  });

  it('prediction deviation: a slow thrust channel between fast electrical frames is weighted by its own clock', () => {
    // thrust at 80 Hz, power at 500 Hz (as the bridge ADC and the electrical channels of a real bench)
    const gpw = 5 / 9.80665e-3 / 155; // 3.29 g/W measured
    const h = harness({ deviation_warn_pct: 5, deviation_trip_pct: 10 }, { predictor: () => ({ gramsPerWatt: gpw, thrust_N: 5 }) });
    for (let i = 0; i < 1500; i++) h.feed({ thrust: i % 6 === 0 ? 5 : null }, 2, 2);
    expect(h.bench.trips).toEqual([]);
    expect(h.warnings).not.toContain('prediction_deviation');
  });

  it('a slow channel past its limit trips although most frames do not carry it (debounce survives gaps)', () => {
    const h = harness({ max_thrust_n: 4 });
    for (let i = 0; i < 100; i++) h.feed({ thrust: i % 6 === 0 ? 6 : null }, 2, 2);
    expect(h.bench.trips[0]?.rule).toBe('max_thrust');
  });

  it('nothing trips while tripped or disconnected, and safe-only rules stay quiet when disarmed', () => {
    const h = harness({ max_current_a: 30 });
    h.bench.state = 'tripped';
    h.feed({ current: 50 }, 200);
    expect(h.bench.trips).toEqual([]);
    const v = harness({});
    v.bench.state = 'safe';
    v.feed({ voltage: 10, thrust: 0, out: 0 }, 200); // pack low, but nothing is turning
    expect(v.bench.trips).toEqual([]);
  });
});

describe('tick rules', () => {
  it('stale telemetry trips while the motor may turn', () => {
    const h = harness({ stale_ms: 250 });
    h.feed({}, 100);
    h.advance(200);
    h.tick();
    expect(h.bench.trips).toEqual([]);
    h.advance(100);
    h.tick();
    expect(h.bench.trips[0]?.rule).toBe('stale_telemetry');
  });
  it('a late tick (the host itself was stalled) defers the stale-telemetry verdict to the next tick', () => {
    const h = harness({ stale_ms: 250 }, { tickMs: 1000 });
    h.feed({}, 100);
    h.tick();
    h.advance(3000); // the process was stalled for 3 s: this tick is late
    h.tick();
    expect(h.bench.trips).toEqual([]);
    h.advance(10); // the next, punctual tick judges (no line arrived: the device is silent)
    h.tick();
    expect(h.bench.trips[0]?.rule).toBe('stale_telemetry');
    h.il.close();
  });

  it('a silent load cell trips while electrical telemetry continues', () => {
    const h = harness({ thrust_stale_ms: 500 });
    h.feed({}, 100);
    h.feed({ thrust: null }, 450);
    h.tick();
    expect(h.bench.trips).toEqual([]);
    h.feed({ thrust: null }, 100);
    h.tick();
    expect(h.bench.trips[0]?.rule).toBe('thrust_sensor_silent');
  });
  it('a burst of bad lines trips when energised, warns when not', () => {
    const h = harness({ bad_line_burst: 20 });
    h.tick();
    h.addBad(15);
    h.advance(500);
    h.tick();
    expect(h.bench.trips).toEqual([]);
    h.addBad(10);
    h.advance(100);
    h.tick();
    expect(h.bench.trips[0]?.rule).toBe('bad_line_burst');
    const s = harness({ bad_line_burst: 20 });
    s.bench.state = 'safe';
    s.tick();
    s.addBad(30);
    s.advance(100);
    s.tick();
    expect(s.bench.trips).toEqual([]);
    expect(s.warnings).toContain('bad_line_burst');
  });
  it('bad lines spread over more than a second do not add up to a burst', () => {
    const h = harness({ bad_line_burst: 20 });
    for (let i = 0; i < 30; i++) {
      h.addBad(2);
      h.advance(200);
      h.tick();
    }
    expect(h.bench.trips).toEqual([]);
  });
});
