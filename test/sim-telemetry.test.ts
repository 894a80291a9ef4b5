// Telemetry of the virtual bench: each channel at the rate its caps announce, the device clock and both
// sequence counters wrapping as the protocol says, and STAT cadence.

import { describe, expect, it } from 'vitest';
import { seqGap } from '../firmware-protocol/src/codec.js';
import { SEQ_MODULO } from '../firmware-protocol/src/messages.js';
import { VirtualBench } from '../server/sim/bench.js';
import { DEFAULT_OPEN_RIG } from '../server/sim/default-rigs.js';
import { BenchHost } from '../server/sim/host-harness.js';

const TEL_KEYS = { thrust: 'thrust', voltage: 'v', current: 'i', rpm: 'rpm', temp: 'temp', torque: 'torque' } as const;

function capsOf(host: BenchHost): Map<string, number> {
  const ident = host.last('IDENT')!;
  return new Map(ident.fields.caps.map((c) => [c.split('@')[0], Number(c.split('@')[1])] as [string, number]));
}

describe('telemetry rates', () => {
  for (const thrustRate of [80, 10] as const) {
    it(`carries each channel at its announced rate (thrust at ${thrustRate}/s)`, () => {
      const rig = { ...DEFAULT_OPEN_RIG, sim: { thrust_rate_hz: thrustRate, torque_rate_hz: 50 } };
      const bench = new VirtualBench({ rig, seed: 3 });
      const host = new BenchHost(bench);
      host.handshake();
      const caps = capsOf(host);
      host.command('ARM');
      host.command('THR', { v: 0.4 });
      host.run(500);
      host.clear();
      const seconds = 4;
      host.run(seconds * 1000);
      expect(caps.get('thrust')).toBe(thrustRate);
      expect(caps.get('torque')).toBe(50);
      const tel = host.of('TEL');
      for (const [ch, rate] of caps) {
        const key = TEL_KEYS[ch as keyof typeof TEL_KEYS];
        const n = tel.filter((t) => (t.fields as Record<string, unknown>)[key] !== undefined).length;
        expect(n / seconds, ch).toBeGreaterThan(rate * 0.98);
        expect(n / seconds, ch).toBeLessThan(rate * 1.02);
      }
      // Frames run at the fastest channel's rate, every one carries the output, and slower channels are left out of most.
      expect(tel.length / seconds).toBeCloseTo(100, -1);
      expect(tel.every((t) => t.fields.out === 0.4)).toBe(true);
      expect(tel.filter((t) => t.fields.temp === undefined).length).toBeGreaterThanOrEqual(tel.length * 0.85);
    });
  }

  it('spaces device timestamps by the frame period', () => {
    const bench = new VirtualBench({ seed: 4 });
    const host = new BenchHost(bench);
    host.handshake();
    host.clear();
    host.run(200);
    const t = host.of('TEL').map((f) => f.fields.t);
    // 100 frames a second: the fastest default channels (voltage, current, rpm) sample at 100/s.
    for (let k = 1; k < t.length; k++) expect(t[k] - t[k - 1]).toBe(10000);
  });

  it('sends STAT at least every 200 ms and on every change', () => {
    const bench = new VirtualBench({ seed: 5 });
    const host = new BenchHost(bench);
    host.handshake();
    host.clear();
    host.run(2000);
    const stats = host.of('STAT');
    for (let k = 1; k < stats.length; k++) expect(stats[k].atMs - stats[k - 1].atMs).toBeLessThanOrEqual(200);
    host.clear();
    host.send('ARM');
    bench.advance(1);
    const s = host.last('STAT');
    expect(s?.fields.armed).toBe(true);
  });
});

describe('wrapping counters', () => {
  it('wraps the 32-bit device clock in microseconds', () => {
    const start = 4294967296 - 150_000; // 150 ms before the wrap
    const bench = new VirtualBench({ seed: 6, clockOffsetUs: start });
    const host = new BenchHost(bench);
    host.handshake();
    host.run(400);
    const t = host.of('TEL').map((f) => f.fields.t);
    let wraps = 0;
    for (let k = 1; k < t.length; k++) {
      const d = (t[k] - t[k - 1] + 4294967296) % 4294967296;
      expect(d).toBe(10000);
      if (t[k] < t[k - 1]) wraps++;
    }
    expect(wraps).toBe(1);
    expect(Math.max(...t)).toBeLessThan(4294967296);
  });

  it('wraps the device sequence number at 65536 without a gap', () => {
    const bench = new VirtualBench({ seed: 7, initialTxSeq: SEQ_MODULO - 20 });
    const host = new BenchHost(bench);
    host.handshake();
    host.run(200);
    const seqs = host.frames.map((f) => f.seq);
    expect(seqs).toContain(65535);
    expect(seqs).toContain(0);
    for (let k = 1; k < seqs.length; k++) expect(seqGap(seqs[k - 1], seqs[k])).toBe(0);
  });

  it('answers host sequence numbers across the host wrap and counts host gaps', () => {
    const bench = new VirtualBench({ seed: 8 });
    const host = new BenchHost(bench);
    host.seq = SEQ_MODULO - 2;
    host.handshake(); // HELLO 65534, HB 65535
    const arm = host.command('ARM'); // seq 0
    expect(arm.tag).toBe('ACK');
    expect(arm.fields.ref).toBe(0);
    expect(bench.stats.hostSeqGaps).toBe(0);
    host.seq = 10; // skip 9 numbers
    host.command('THR', { v: 0 });
    expect(bench.stats.hostSeqGaps).toBe(9);
  });
});
