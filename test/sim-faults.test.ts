// Fault injection: each kind does what faults.ts documents, and the firmware's own defences react to the
// ones it can see.

import { describe, expect, it } from 'vitest';
import { VirtualBench } from '../server/sim/bench.js';
import { BenchHost } from '../server/sim/host-harness.js';

function running(throttle: number, seed = 31): { bench: VirtualBench; host: BenchHost } {
  const bench = new VirtualBench({ seed });
  const host = new BenchHost(bench);
  host.handshake();
  host.command('ARM');
  host.command('THR', { v: throttle });
  host.run(1500);
  return { bench, host };
}

describe('fault injection', () => {
  it('overcurrent: the firmware limit cuts the output within a few current samples', () => {
    const { bench, host } = running(0.5);
    bench.injectFault('overcurrent', { current_a: 60 });
    // Current is sampled at 100/s: the limit (5 ms over) is seen on the first or second sample.
    host.run(25, 2);
    expect(bench.state.output).toBe(0);
    expect(bench.state.fault).toBe('overcurrent');
    expect(host.of('LOG').some((l) => l.fields.level === 'error')).toBe(true);
  });

  it('stall: the rotor stops and the current surge trips overcurrent at high throttle', () => {
    const { bench, host } = running(0.6);
    bench.injectFault('stall');
    host.run(30, 2);
    expect(bench.truth.rpm).toBe(0);
    expect(bench.state.fault).toBe('overcurrent');
    expect(bench.state.output).toBe(0);
  });

  it('stall at low throttle without a trip: no rpm, current well above the running value', () => {
    const { bench, host } = running(0.15);
    const before = bench.truth.busCurrentA;
    const f = bench.injectFault('stall', { duration_ms: 200 });
    host.run(100);
    expect(bench.truth.rpm).toBe(0);
    expect(bench.truth.busCurrentA).toBeGreaterThan(before * 3);
    host.run(1000);
    expect(f.ended).toBe(true);
    expect(bench.truth.rpm).toBeGreaterThan(500);
  });

  it('prop_loss: thrust collapses, the rotor overspeeds and the current drops', () => {
    const { bench, host } = running(0.6);
    const t0 = bench.truth;
    bench.injectFault('prop_loss');
    host.run(1000);
    const t1 = bench.truth;
    expect(t1.thrustN).toBeLessThan(t0.thrustN * 0.3);
    expect(t1.rpm).toBeGreaterThan(t0.rpm * 1.05); // towards the no-load speed at this duty
    expect(t1.busCurrentA).toBeLessThan(t0.busCurrentA * 0.5);
    expect(bench.state.armed).toBe(true); // nothing the firmware itself can see as a fault
  });

  it('thrust_dropout silent: thrust leaves the telemetry and the watchdog latches sensor', () => {
    const { bench, host } = running(0.4);
    host.clear();
    bench.injectFault('thrust_dropout');
    host.run(300);
    expect(host.of('TEL').filter((t) => t.fields.thrust !== undefined).length).toBeLessThanOrEqual(1);
    expect(bench.state.armed).toBe(true);
    host.run(400);
    expect(bench.state.fault).toBe('sensor');
    expect(bench.state.output).toBe(0);
  });

  it('thrust_dropout stuck: the reading freezes and only the host can tell', () => {
    const { bench, host } = running(0.4);
    bench.injectFault('thrust_dropout', { mode: 'stuck', duration_ms: 500 });
    host.clear();
    host.command('THR', { v: 0.7 });
    host.run(400);
    const values = new Set(host.of('TEL').map((t) => t.fields.thrust).filter((x) => x !== undefined));
    expect(values.size).toBe(1);
    expect(bench.state.fault).toBe('none');
    host.run(400);
    const after = new Set(host.of('TEL').map((t) => t.fields.thrust).filter((x) => x !== undefined));
    expect(after.size).toBeGreaterThan(5);
  });

  it('garbled_lines: corrupted lines fail their checksum in either direction', () => {
    const { bench, host } = running(0.3);
    bench.injectFault('garbled_lines', { probability: 0.5, direction: 'both', duration_ms: 500 });
    const badIn = bench.stats.badLines;
    for (let k = 0; k < 50; k++) {
      host.send('STATUS');
      bench.advance(10);
    }
    // About 100 TEL and a few STAT a second at the default rates, half of them garbled over 0.5 s.
    expect(host.badLines).toBeGreaterThan(20);
    expect(bench.stats.badLines - badIn).toBeGreaterThan(5);
    const before = host.badLines;
    bench.advance(500);
    host.run(200);
    expect(host.badLines).toBe(before);
  });

  it('unplug: nothing in or out, the heartbeat latches, and the link comes back afterwards', () => {
    const { bench, host } = running(0.5);
    const events: boolean[] = [];
    bench.onLink((p) => events.push(p));
    host.clear();
    bench.injectFault('unplug', { duration_ms: 1000 });
    host.run(900);
    expect(host.frames.length).toBe(0);
    expect(bench.state.fault).toBe('heartbeat');
    expect(bench.state.output).toBe(0);
    host.run(200);
    expect(events).toEqual([false, true]);
    expect(host.of('STAT').length).toBeGreaterThan(0);
    expect(host.last('STAT')!.fields.fault).toBe('heartbeat');
  });

  it('brownout: the supply collapses and the firmware latches brownout', () => {
    const { bench, host } = running(0.5);
    bench.injectFault('brownout', { duration_ms: 200 });
    host.run(150, 5);
    expect(bench.state.fault).toBe('brownout');
    expect(bench.state.output).toBe(0);
  });

  it('reset: the controller comes back disarmed, unhandshaken, with fresh counters and fault reset', () => {
    const { bench, host } = running(0.5);
    const clockBefore = bench.state.deviceClockUs;
    host.clear();
    bench.injectFault('reset', { down_ms: 50 });
    host.run(40, 5);
    expect(bench.state.offline).toBe(true);
    expect(bench.state.output).toBe(0);
    host.run(20, 5);
    expect(bench.state.offline).toBe(false);
    const ident = host.of('IDENT');
    expect(ident.length).toBe(1);
    expect(ident[0].seq).toBe(0);
    expect(bench.state.armed).toBe(false);
    expect(bench.state.handshaken).toBe(false);
    expect(bench.state.fault).toBe('reset');
    expect(bench.state.deviceClockUs).toBeLessThan(clockBefore);
    const r = host.command('ARM');
    expect(r.tag === 'NAK' && r.fields.why).toBe('not_ready');
    host.handshake();
    const r2 = host.command('ARM');
    expect(r2.tag === 'NAK' && r2.fields.why).toBe('latched');
    expect(host.command('CLEAR').tag).toBe('ACK');
    expect(host.command('ARM').tag).toBe('ACK');
  });

  it('ignore_heartbeat: buggy firmware keeps running without heartbeats', () => {
    const { bench, host } = running(0.4);
    const f = bench.injectFault('ignore_heartbeat');
    bench.advance(1000);
    expect(bench.state.armed).toBe(true);
    expect(bench.state.output).toBe(0.4);
    expect(bench.state.hbOk).toBe(true);
    f.clear();
    bench.advance(400);
    expect(bench.state.fault).toBe('heartbeat');
  });

  it('schedules a fault with after_ms and ends it after duration_ms', () => {
    const { bench, host } = running(0.3);
    const f = bench.injectFault('stall', { after_ms: 100, duration_ms: 100 });
    host.run(50);
    expect(f.active).toBe(false);
    host.run(100);
    expect(f.active).toBe(true);
    expect(bench.state.activeFaults).toEqual(['stall']);
    host.run(100);
    expect(f.ended).toBe(true);
    expect(bench.state.activeFaults).toEqual([]);
  });
});
