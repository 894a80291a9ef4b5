// Safety rules of the simulated firmware, each on its own: the microcontroller is the final authority, so
// these are the behaviours every host-side test later relies on.

import { describe, expect, it } from 'vitest';
import { encodeLine, withChecksum } from '../firmware-protocol/src/codec.js';
import { DEFAULT_HEARTBEAT_TIMEOUT_MS } from '../firmware-protocol/src/messages.js';
import { VirtualBench } from '../server/sim/bench.js';
import { BenchHost } from '../server/sim/host-harness.js';

function setup(seed = 7): { bench: VirtualBench; host: BenchHost } {
  const bench = new VirtualBench({ seed });
  const host = new BenchHost(bench);
  return { bench, host };
}

function armedAt(throttle: number): { bench: VirtualBench; host: BenchHost } {
  const s = setup();
  s.host.handshake();
  expect(s.host.command('ARM').tag).toBe('ACK');
  expect(s.host.command('THR', { v: throttle }).tag).toBe('ACK');
  s.host.run(1500);
  return s;
}

describe('boot', () => {
  it('boots disarmed with zero output, sends IDENT once and a STAT', () => {
    const captured: string[] = [];
    const bench = new VirtualBench({ seed: 1, output: (c) => captured.push(c) });
    expect(bench.state.armed).toBe(false);
    expect(bench.state.output).toBe(0);
    expect(bench.state.fault).toBe('none');
    expect(bench.state.handshaken).toBe(false);
    const text = captured.join('');
    expect(text.match(/^IDENT /gm)?.length).toBe(1);
    expect(text).toMatch(/^STAT \d+ armed=0 out=0\.000 fault=none hbok=0\*/m);
    bench.advance(1000);
    // IDENT once at boot, then only in answer to HELLO.
    expect(captured.join('').match(/^IDENT /gm)?.length).toBe(1);
  });

  it('answers HELLO with IDENT carrying caps, ceiling and heartbeat time-out, then a STAT', () => {
    const { bench, host } = setup();
    host.send('HELLO', { proto: 1 });
    bench.advance(1);
    const ident = host.last('IDENT');
    expect(ident).toBeDefined();
    expect(ident!.fields.proto).toBe(1);
    expect(ident!.fields.caps).toEqual(['thrust@80', 'voltage@100', 'current@100', 'rpm@100', 'temp@10']);
    expect(ident!.fields.thrmax).toBe(0.9);
    expect(ident!.fields.hb).toBe(DEFAULT_HEARTBEAT_TIMEOUT_MS);
    const i = host.frames.findIndex((f) => f.tag === 'IDENT');
    expect(host.frames.slice(i + 1).some((f) => f.tag === 'STAT')).toBe(true);
  });

  it('before the handshake refuses ARM, THR, CLEAR and TARE as not_ready, but carries out DISARM, BYE and STOP (PROTOCOL.md)', () => {
    const { bench, host } = setup();
    for (const [tag, fields] of [
      ['ARM', {}],
      ['THR', { v: 0 }],
      ['CLEAR', {}],
      ['TARE', {}],
    ] as const) {
      const r = host.command(tag, fields as never);
      expect(r.tag, tag).toBe('NAK');
      expect(r.tag === 'NAK' && r.fields.why, tag).toBe('not_ready');
    }
    for (const tag of ['DISARM', 'BYE'] as const) expect(host.command(tag, {}).tag, tag).toBe('ACK');
    expect(bench.state.fault).toBe('none');
    host.clear();
    host.send('STATUS');
    bench.advance(1);
    expect(host.last('STAT')).toBeDefined();
    expect(host.last('STAT')!.fields.hbok).toBe(false);
    expect(bench.state.armed).toBe(false);
    expect(host.command('STOP', {}).tag).toBe('ACK');
    expect(bench.state.fault).toBe('estop');
  });

  it('does not complete the handshake for another protocol version', () => {
    const { bench, host } = setup();
    host.send('HELLO', { proto: 2 });
    bench.advance(2);
    expect(host.last('IDENT')).toBeDefined();
    const r = host.command('ARM');
    expect(r.tag === 'NAK' && r.fields.why).toBe('not_ready');
  });
});

describe('arming and throttle', () => {
  it('arms only at zero commanded throttle', () => {
    const { bench, host } = setup();
    host.handshake();
    expect(host.command('ARM').tag).toBe('ACK');
    expect(bench.state.armed).toBe(true);
    expect(host.command('THR', { v: 0.3 }).tag).toBe('ACK');
    const again = host.command('ARM');
    expect(again.tag).toBe('NAK');
    expect(again.tag === 'NAK' && again.fields.why).toBe('throttle_not_zero');
    // Still armed at the commanded throttle: a refused command changes nothing.
    expect(bench.state.output).toBe(0.3);
  });

  it('refuses throttle above the ceiling and never clamps it', () => {
    const { bench, host } = setup();
    host.handshake();
    host.command('ARM');
    host.command('THR', { v: 0.4 });
    const r = host.command('THR', { v: 0.95 });
    expect(r.tag === 'NAK' && r.fields.why).toBe('above_ceiling');
    expect(bench.state.output).toBe(0.4);
    expect(host.command('THR', { v: 0.9 }).tag).toBe('ACK');
    expect(bench.state.output).toBe(0.9);
  });

  it('refuses non-zero throttle while disarmed but accepts zero', () => {
    const { bench, host } = setup();
    host.handshake();
    const r = host.command('THR', { v: 0.2 });
    expect(r.tag === 'NAK' && r.fields.why).toBe('not_armed');
    expect(host.command('THR', { v: 0 }).tag).toBe('ACK');
    expect(bench.state.output).toBe(0);
  });

  it('acknowledges motor-changing commands with ref = the command sequence number', () => {
    const { host } = setup();
    host.handshake();
    host.seq = 4321;
    const r = host.command('ARM');
    expect(r.tag).toBe('ACK');
    expect(r.fields.ref).toBe(4321);
  });

  it('DISARM cuts the output and forgets the throttle', () => {
    const { bench, host } = armedAt(0.5);
    expect(bench.truth.rpm).toBeGreaterThan(3000);
    expect(host.command('DISARM').tag).toBe('ACK');
    expect(bench.state.armed).toBe(false);
    expect(bench.state.output).toBe(0);
    expect(bench.state.commanded).toBe(0);
    expect(bench.state.fault).toBe('none');
  });

  it('a new HELLO while armed disarms (a new host session starts safe)', () => {
    const { bench, host } = armedAt(0.3);
    host.send('HELLO', { proto: 1 });
    bench.advance(1);
    expect(bench.state.armed).toBe(false);
    expect(bench.state.output).toBe(0);
  });
});

describe('heartbeat', () => {
  it('cuts the output and latches heartbeat once HB stops for longer than the time-out', () => {
    const { bench, host } = armedAt(0.5);
    const lastHbMs = bench.state.simTimeMs;
    host.send('HB');
    // Just inside the time-out nothing happens ...
    bench.advance(DEFAULT_HEARTBEAT_TIMEOUT_MS - 5);
    expect(bench.state.armed).toBe(true);
    expect(bench.state.output).toBe(0.5);
    // ... and just past it the output is already zero (checked every 0.5 ms tick).
    bench.advance(6);
    expect(bench.state.output).toBe(0);
    expect(bench.state.armed).toBe(false);
    expect(bench.state.fault).toBe('heartbeat');
    expect(bench.state.hbOk).toBe(false);
    const cut = bench.transitions[bench.transitions.length - 1];
    expect(cut.to).toBe('latched');
    expect(cut.atUs / 1000 - lastHbMs).toBeLessThanOrEqual(DEFAULT_HEARTBEAT_TIMEOUT_MS + 1);
    const stat = host.last('STAT')!;
    expect(stat.fields).toMatchObject({ armed: false, out: 0, fault: 'heartbeat', hbok: false });
  });

  it('latches heartbeat even while disarmed, and heartbeats resuming do not unlatch', () => {
    const { bench, host } = setup();
    host.handshake();
    bench.advance(400);
    expect(bench.state.fault).toBe('heartbeat');
    host.run(200);
    expect(bench.state.hbOk).toBe(true);
    expect(bench.state.fault).toBe('heartbeat');
    const r = host.command('ARM');
    expect(r.tag === 'NAK' && r.fields.why).toBe('latched');
  });

  it('does not watch the heartbeat before the handshake', () => {
    const { bench } = setup();
    bench.advance(2000);
    expect(bench.state.fault).toBe('none');
  });
});

describe('STOP and the latch', () => {
  it('STOP cuts at once, disarms and latches estop; only STATUS, STOP, CLEAR (and HB, HELLO) are accepted', () => {
    const { bench, host } = armedAt(0.6);
    host.clear();
    const s = host.send('STOP');
    // No tick has run: the STOP was carried out in the receive path.
    expect(bench.state.output).toBe(0);
    expect(bench.state.armed).toBe(false);
    expect(bench.state.fault).toBe('estop');
    expect(host.frames.some((f) => f.tag === 'ACK' && f.fields.ref === s)).toBe(true);

    for (const [tag, fields] of [
      ['ARM', {}],
      ['THR', { v: 0 }],
      ['TARE', {}],
      ['CALSET', { ch: 'thrust', scale: 1, offset: 0 }],
    ] as const) {
      const r = host.command(tag, fields as never);
      expect(r.tag === 'NAK' && r.fields.why, tag).toBe('latched');
    }
    host.clear();
    host.send('STATUS');
    bench.advance(1);
    expect(host.last('STAT')!.fields.fault).toBe('estop');
    expect(host.command('STOP').tag).toBe('ACK');
    expect(bench.state.fault).toBe('estop');
  });

  it('STOP why=host_trip latches host_trip', () => {
    const { bench, host } = armedAt(0.3);
    host.send('STOP', { why: 'host_trip' });
    expect(bench.state.fault).toBe('host_trip');
    expect(bench.state.output).toBe(0);
  });

  it('STOP overtakes throttle commands queued before it', () => {
    const { bench, host } = setup();
    host.handshake();
    host.command('ARM');
    // Ten THR lines and a STOP in one chunk: the main loop takes 4 commands a tick, the STOP goes first.
    let chunk = '';
    const thrSeqs: number[] = [];
    for (let k = 0; k < 10; k++) {
      thrSeqs.push(host.seq);
      chunk += encodeLine('THR', host.seq++, { v: 0.5 });
    }
    const stopSeq = host.seq;
    chunk += encodeLine('STOP', host.seq++, {});
    bench.receive(chunk);
    expect(bench.state.fault).toBe('estop');
    bench.advance(10);
    expect(bench.state.output).toBe(0);
    const replies = host.frames.filter((f) => f.tag === 'ACK' || f.tag === 'NAK');
    const stopIdx = replies.findIndex((f) => f.fields.ref === stopSeq);
    expect(stopIdx).toBeGreaterThanOrEqual(0);
    for (const s of thrSeqs) {
      const r = replies.find((f) => f.fields.ref === s)!;
      expect(replies.indexOf(r)).toBeGreaterThan(stopIdx);
      expect(r.tag === 'NAK' && r.fields.why).toBe('latched');
    }
  });

  it('CLEAR unlatches but stays disarmed; arming then needs a fresh ARM', () => {
    const { bench, host } = armedAt(0.4);
    host.send('STOP');
    expect(host.command('CLEAR').tag).toBe('ACK');
    expect(bench.state.fault).toBe('none');
    expect(bench.state.armed).toBe(false);
    expect(bench.state.output).toBe(0);
    const r = host.command('THR', { v: 0.2 });
    expect(r.tag === 'NAK' && r.fields.why).toBe('not_armed');
    expect(host.command('ARM').tag).toBe('ACK');
  });

  it('the telemetry after a STOP reports zero output and idle current within one frame period', () => {
    const { bench, host } = armedAt(0.7);
    const before = host.last('TEL')!;
    expect(before.fields.out).toBe(0.7);
    expect(before.fields.i!).toBeGreaterThan(3);
    host.clear();
    host.send('STOP');
    const stopAt = bench.state.simTimeMs;
    // One telemetry period at 100 frames/s (the fastest default channel) is 10 ms.
    bench.advance(10);
    const tel = host.of('TEL');
    expect(tel.length).toBeGreaterThanOrEqual(1);
    const first = tel[0];
    expect(first.atMs - stopAt).toBeLessThanOrEqual(10);
    expect(first.fields.out).toBe(0);
    const withCurrent = tel.find((t) => t.fields.i !== undefined)!;
    expect(withCurrent.fields.i!).toBeLessThan(0.5);
    // The rotor takes longer, but braking brings it down quickly.
    bench.advance(300);
    expect(bench.truth.rpm).toBeLessThan(100);
  });
});

describe('tare and calibration', () => {
  it('TARE zeroes the load cell, and is refused while armed', () => {
    const { bench, host } = setup();
    host.handshake();
    host.run(500);
    const raw = host.last('TEL')!;
    const beforeThrust = host.of('TEL').filter((t) => t.fields.thrust !== undefined).slice(-10);
    const mean = beforeThrust.reduce((a, t) => a + t.fields.thrust!, 0) / beforeThrust.length;
    expect(Math.abs(mean)).toBeGreaterThan(0.3); // the stand's preload before tare
    expect(raw).toBeDefined();
    expect(host.command('TARE', { n: 16 }).tag).toBe('ACK');
    host.run(400);
    const after = host.of('TEL').filter((t) => t.fields.thrust !== undefined).slice(-10);
    const m2 = after.reduce((a, t) => a + t.fields.thrust!, 0) / after.length;
    expect(Math.abs(m2)).toBeLessThan(0.02);

    host.command('ARM');
    const r = host.command('TARE');
    expect(r.tag === 'NAK' && r.fields.why).toBe('busy');
    expect(bench.state.taring).toBe(false);
  });

  it('CALSET is refused as unsupported', () => {
    const { host } = setup();
    host.handshake();
    const r = host.command('CALSET', { ch: 'thrust', scale: 1.01, offset: 0 });
    expect(r.tag === 'NAK' && r.fields.why).toBe('unsupported');
  });
});

describe('bad host lines', () => {
  it('counts and ignores lines with a bad checksum, with a rate-limited warning', () => {
    const { bench, host } = setup();
    host.handshake();
    host.clear();
    const good = withChecksum('ARM 900');
    const bad = good.slice(0, -1) + (good.endsWith('0') ? '1' : '0');
    for (let k = 0; k < 5; k++) bench.receive(bad + '\n');
    bench.receive('garbage without newline then newline\n');
    bench.advance(2);
    expect(bench.state.armed).toBe(false);
    expect(bench.stats.badLines).toBe(6);
    expect(bench.stats.badByReason.checksum).toBe(5);
    expect(host.of('LOG').filter((l) => l.fields.level === 'warn').length).toBe(1);
    expect(host.of('ACK').length + host.of('NAK').length).toBe(0);
  });
});
