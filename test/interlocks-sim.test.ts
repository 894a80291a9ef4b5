// Every host interlock rule tripping on the virtual bench, each from a realistic cause (a fault injected in
// the bench or a limit set below the operating point), and each time the device output reaching zero: the
// cut is written first, the bench latches tripped, and the trip names its rule, value and limit.

import { afterEach, describe, expect, it } from 'vitest';
import type { Sample } from '../server/bench/telemetry.js';
import type { TripRecord } from '../server/bench/controller.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { DEFAULT_OPEN_RIG } from '../server/sim/index.js';
import type { RigSpec } from '../server/model/rig-types.js';

const open: RunningDaemon[] = [];
afterEach(async () => {
  for (const d of open.splice(0)) await d.close();
});

async function until(check: () => boolean, ms: number, label: string): Promise<void> {
  const t0 = Date.now();
  while (!check()) {
    if (Date.now() - t0 > ms) throw new Error(`timed out waiting for ${label}`);
    await new Promise((r) => setTimeout(r, 5));
  }
}

interface Run {
  d: RunningDaemon;
  trip: TripRecord | null;
  /** Samples received after the trip: device time (s) and output. */
  afterTrip: { dt: number; out: number | null }[];
  lastSample: Sample | null;
}

async function spinUp(limits: Record<string, number>, throttle: number, extra: { rig?: RigSpec } = {}): Promise<Run> {
  const d = await startDaemon({
    source: { kind: 'sim', seed: 11 },
    httpPort: 0,
    limits,
    log: () => {},
    ...(extra.rig ? { rig: extra.rig } : {}),
  });
  open.push(d);
  await d.firstConnect;
  const run: Run = { d, trip: null, afterTrip: [], lastSample: null };
  d.controller.on('trip', (t) => (run.trip ??= t));
  d.onSample((s) => {
    run.lastSample = s;
    if (run.trip) run.afterTrip.push({ dt: s.dt, out: s.out });
  });
  await until(() => run.lastSample !== null, 3000, 'telemetry');
  await d.controller.tare();
  await new Promise((r) => setTimeout(r, 300)); // the tare averages a few load-cell readings
  await d.controller.arm();
  // A trip during the ramp ends the ramp with an error: that is the interlock working, not a test failure.
  if (throttle > 0) await d.controller.setThrottle(throttle).catch(() => {});
  return run;
}

async function expectTrip(run: Run, rule: string, ms = 8000): Promise<void> {
  await until(() => run.trip !== null || run.d.controller.state === 'tripped', ms, `a trip by ${rule}`);
  expect(run.trip?.rule, `tripped by ${run.trip?.rule ?? run.d.controller.view().reason}`).toBe(rule);
  expect(run.trip!.cutWrittenAt).not.toBeNull();
  expect(run.d.controller.state).toBe('tripped');
  // The device output is zero within one telemetry period of the cut, in device time: find when the
  // firmware latched (its own clock), then every frame stamped a period or more after that says out=0.
  await until(() => run.d.sim!.state.fault !== 'none', 2000, 'the device to latch');
  const latch = [...run.d.sim!.transitions].reverse().find((t) => t.to === 'latched');
  expect(latch, 'firmware latched').toBeDefined();
  const periodUs = 1e6 / (run.d.link.identity!.channels.voltage ?? 500);
  await until(() => run.afterTrip.some((f) => f.dt * 1e6 >= latch!.atUs + periodUs), 5000, 'telemetry after the cut');
  const late = run.afterTrip.filter((f) => f.out !== null && f.dt * 1e6 >= latch!.atUs + periodUs);
  expect(late.length).toBeGreaterThan(0);
  expect(late.every((f) => f.out === 0), `outputs a period after the cut: ${late.slice(0, 5).map((f) => f.out).join(',')}`).toBe(true);
  expect(run.d.sim!.state.output).toBe(0);
  expect(run.d.sim!.state.armed).toBe(false);
  expect(run.d.sim!.state.fault).toBe('host_trip');
}

describe('interlocks on the virtual bench', () => {
  it('max_current', async () => {
    const r = await spinUp({ max_current_a: 6 }, 0.75);
    await expectTrip(r, 'max_current');
    expect(r.trip!.value).toBeGreaterThan(6);
    expect(r.trip!.limit).toBe(6);
  });

  it('max_power', async () => {
    const r = await spinUp({ max_power_w: 80 }, 0.75);
    await expectTrip(r, 'max_power');
  });

  it('max_thrust', async () => {
    const r = await spinUp({ max_thrust_n: 4 }, 0.75);
    await expectTrip(r, 'max_thrust');
  });

  it('max_rpm', async () => {
    const r = await spinUp({ max_rpm: 5000 }, 0.75);
    await expectTrip(r, 'max_rpm');
  });

  it('tip_mach', async () => {
    // 0.254 m propeller: Mach 0.2 at about 5100 rpm (a = 340.3 m/s at 288.15 K)
    const r = await spinUp({ tip_mach_trip: 0.2, tip_mach_warn: 0.15 }, 0.75);
    await expectTrip(r, 'tip_mach');
  });

  it('max_temp', async () => {
    const r = await spinUp({}, 0.5);
    await until(() => r.lastSample?.temp !== null && r.lastSample?.temp !== undefined, 3000, 'a temperature reading');
    // a limit just below the motor's present temperature (the range check is for configuration files)
    r.d.interlocks.limits = { ...r.d.interlocks.limits, max_temp_c: (r.lastSample!.temp ?? 20) - 0.5 };
    await expectTrip(r, 'max_temp');
  });

  it('min_pack_voltage, from a supply brown-out above the firmware floor', async () => {
    const r = await spinUp({}, 0.5);
    r.d.sim!.injectFault('brownout', { voltage_v: 12.6, duration_ms: 2000 }); // 3.15 V a cell, under 3.3
    await expectTrip(r, 'min_pack_voltage');
  });

  it('vibration', async () => {
    const r = await spinUp({ vibration_std_n: 0.01 }, 0.6);
    await expectTrip(r, 'vibration');
  });

  it('thrust_at_zero_throttle, from a load cell stuck at its last reading', async () => {
    const r = await spinUp({}, 0.6);
    await until(() => (r.lastSample?.thrust ?? 0) > 3, 5000, 'thrust');
    r.d.sim!.injectFault('thrust_dropout', { mode: 'stuck' });
    await r.d.controller.setThrottle(0);
    await expectTrip(r, 'thrust_at_zero_throttle');
  });

  it('prediction_deviation: quiet with the right rig description, trips with the wrong one', async () => {
    const limits = { deviation_warn_pct: 15, deviation_trip_pct: 20 };
    const right = await spinUp(limits, 0.6);
    await new Promise((res) => setTimeout(res, 2500)); // steady for longer than the rule's 1.5 s
    expect(right.trip).toBeNull();
    await right.d.close();
    // a 750 rpm/V motor on the stand, a 400 rpm/V motor in the rig file: the model expects far more thrust per watt
    const { sim: _truth, ...described } = DEFAULT_OPEN_RIG;
    const wrongRig: RigSpec = { ...described, motor: { ...described.motor, kv_rpm_per_v: 400 } };
    const wrong = await spinUp(limits, 0.6, { rig: wrongRig });
    await expectTrip(wrong, 'prediction_deviation', 10_000);
    expect(wrong.trip!.value).toBeLessThan(-20);
  });

  it('stale_telemetry, from a controller that stops talking', async () => {
    const r = await spinUp({}, 0.4);
    r.d.sim!.injectFault('ignore_heartbeat');
    r.d.sim!.injectFault('garbled_lines', { probability: 1, direction: 'd2h', duration_ms: 1500 });
    // every line corrupted: no telemetry gets through; the burst rule may see it first, so widen it
    r.d.interlocks.limits = { ...r.d.interlocks.limits, bad_line_burst: 10_000 };
    await expectTrip(r, 'stale_telemetry');
  });

  it('thrust_sensor_silent, from a load cell that stops answering', async () => {
    const r = await spinUp({ thrust_stale_ms: 200 }, 0.4);
    r.d.sim!.injectFault('thrust_dropout', { mode: 'silent' });
    await expectTrip(r, 'thrust_sensor_silent');
  });

  it('bad_line_burst, from a noisy cable', async () => {
    const r = await spinUp({ bad_line_burst: 20 }, 0.4);
    r.d.sim!.injectFault('garbled_lines', { probability: 0.3, direction: 'd2h' });
    await expectTrip(r, 'bad_line_burst');
  });

  it('a firmware that ignores heartbeat loss is still stopped by the host limits', async () => {
    const r = await spinUp({ max_current_a: 6 }, 0.3);
    r.d.sim!.injectFault('ignore_heartbeat');
    await r.d.controller.setThrottle(0.75).catch(() => {}); // the trip ends the ramp
    await expectTrip(r, 'max_current');
  });
});

describe('throttle slew', () => {
  it('upward throttle changes are ramped at the slew limit; downward ones are immediate', async () => {
    const r = await spinUp({ max_slew_per_s: 0.5 }, 0);
    const seen: number[] = [];
    const t0 = performance.now();
    const stamps: [number, number][] = [];
    const poll = setInterval(() => {
      seen.push(r.d.sim!.state.commanded);
      stamps.push([performance.now() - t0, r.d.sim!.state.commanded]);
    }, 2);
    await r.d.controller.setThrottle(0.5);
    clearInterval(poll);
    // the device saw many small steps, never a jump of more than one ramp tick's worth (0.5/s x 20 ms = 0.01)
    const distinct = [...new Set(seen)];
    expect(distinct.length).toBeGreaterThan(20);
    for (let i = 1; i < distinct.length; i++) expect(distinct[i] - distinct[i - 1]).toBeLessThanOrEqual(0.0101);
    expect(r.d.sim!.state.commanded).toBe(0.5);
    await r.d.controller.setThrottle(0.1);
    expect(r.d.sim!.state.commanded).toBe(0.1);
  });

  it('a stop during a ramp ends the ramp and cuts the output', async () => {
    const r = await spinUp({ max_slew_per_s: 0.5 }, 0);
    const ramp = r.d.controller.setThrottle(0.8).catch((e: Error) => e.message);
    await until(() => r.d.sim!.state.commanded > 0.1, 3000, 'ramp under way');
    r.d.controller.stop('test');
    expect(await ramp).toMatch(/ramp ended/);
    await until(() => r.d.sim!.state.output === 0, 1000, 'output zero');
    await new Promise((res) => setTimeout(res, 100));
    expect(r.d.sim!.state.commanded).toBe(0);
  });
});

describe('rig throttle ceiling', () => {
  it("a throttle above the rig's max_throttle is refused, never clamped, and the device is untouched", async () => {
    const r = await spinUp({ max_throttle: 0.5 }, 0.3);
    await expect(r.d.controller.setThrottle(0.6)).rejects.toThrow(/max_throttle 0\.5/);
    expect(r.d.sim!.state.commanded).toBeCloseTo(0.3, 3);
    await r.d.controller.setThrottle(0.5);
    expect(r.d.sim!.state.commanded).toBeCloseTo(0.5, 3);
  });
});
