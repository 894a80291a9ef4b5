// Garbage on the serial line while the daemon runs, written into the device side of a real pty between the
// virtual bench's own lines: megabytes without a newline, then random bytes. The daemon must hold at most one
// capped partial line (the LineSplitter), count what it dropped by reason, stay connected and never throw;
// while the motor may turn, a burst of corrupted lines trips the bench and cuts the output.

import { afterEach, describe, expect, it } from 'vitest';
import { MAX_LINE_BYTES } from '../firmware-protocol/src/messages.js';
import type { LinkStatus } from '../server/api/messages.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { rawPtyBench, type RawPtyBench } from './helpers/raw-pty-bench.js';
import { armInProcess } from './helpers/dashboard.js';
import { waitFor } from './helpers/sim-process.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function setUp(seed: number): Promise<{ pty: RawPtyBench; d: RunningDaemon; statuses: LinkStatus[]; logs: string[]; hostTrips: string[]; warnings: string[] }> {
  const pty = await rawPtyBench({ seed });
  cleanups.push(() => pty.close());
  const logs: string[] = [];
  const d = await startDaemon({ source: { kind: 'serial', path: pty.devicePath }, httpPort: 0, log: (l) => logs.push(l) });
  cleanups.push(() => d.close());
  await d.firstConnect;
  expect(d.link.isReady).toBe(true);
  const statuses: LinkStatus[] = [];
  d.link.on('status', (v) => statuses.push(v.status));
  const hostTrips: string[] = [];
  d.controller.on('trip', (t) => hostTrips.push(t.rule));
  const warnings: string[] = [];
  d.interlocks.on('warning', ({ rule }) => warnings.push(rule));
  return { pty, d, statuses, logs, hostTrips, warnings };
}

/**
 * Disarmed, garbage must never make the host trip. The bench here shares this process's event loop, so on a
 * badly loaded machine pushing megabytes can stall it past the heartbeat time-out and the device latches
 * 'heartbeat' by itself (the fail-safe answer to a stalled host); that latch is cleared like any other.
 */
async function expectUntripped(d: RunningDaemon, hostTrips: string[]): Promise<void> {
  expect(hostTrips).toEqual([]);
  if (d.controller.state === 'tripped') {
    expect(d.controller.view().fault).toBe('heartbeat');
    await d.controller.acknowledge();
  }
  await waitFor(() => d.controller.state === 'safe', 5000, 'safe');
}

/** The link's partial-line buffer (private: read for the bound, never written). */
function buffered(d: RunningDaemon): number {
  return (d.link as unknown as { splitter: { buffered: number } }).splitter.buffered;
}

function badTotal(d: RunningDaemon): number {
  return Object.values(d.link.view().linesBad).reduce((a, b) => a + b, 0);
}

/** Deterministic noise (xorshift32), so a failure can be replayed. */
function noise(n: number, seed: number): Buffer {
  const b = Buffer.alloc(n);
  let x = seed >>> 0 || 1;
  for (let i = 0; i < n; i++) {
    x ^= x << 13;
    x >>>= 0;
    x ^= x >>> 17;
    x ^= x << 5;
    x >>>= 0;
    b[i] = x & 0xff;
  }
  return b;
}

describe('garbage on the serial line (pty device side)', () => {
  it('megabytes without a newline: one capped partial line at most, counted as too_long, link stays ready', async () => {
    const { pty, d, statuses, hostTrips } = await setUp(31);
    let maxBuffered = 0;
    const watch = setInterval(() => (maxBuffered = Math.max(maxBuffered, buffered(d))), 2);
    cleanups.push(() => clearInterval(watch));
    const tooLongBefore = d.link.view().linesBad.too_long ?? 0;
    const okBefore = d.link.view().linesOk;
    const chunk = Buffer.alloc(64 * 1024, 'A'.charCodeAt(0));
    // 8 MiB of one endless "line"; the bench's own lines keep arriving around it.
    for (let i = 0; i < 128; i++) {
      await pty.writeRaw(chunk);
      maxBuffered = Math.max(maxBuffered, buffered(d));
    }
    await waitFor(() => (d.link.view().linesBad.too_long ?? 0) > tooLongBefore, 10_000, 'too_long counted');
    clearInterval(watch);
    // The cap is MAX_LINE_BYTES plus one byte of slack for a CR (firmware-protocol/src/lines.ts).
    expect(maxBuffered).toBeLessThanOrEqual(MAX_LINE_BYTES + 1);
    expect(d.link.isReady).toBe(true);
    expect(statuses).toEqual([]);
    // Good lines still get through once the noise stops.
    await waitFor(() => d.link.view().linesOk > okBefore + 200, 10_000, 'valid lines again');
    await expectUntripped(d, hostTrips);
  });

  it('random bytes while disarmed: counted by reason, warned about, link and bench unaffected', async () => {
    const { pty, d, statuses, hostTrips, warnings } = await setUp(32);
    const before = badTotal(d);
    for (let i = 0; i < 32; i++) await pty.writeRaw(noise(64 * 1024, 1000 + i));
    await waitFor(() => badTotal(d) > before + 100, 10_000, 'bad lines counted');
    const reasons = Object.keys(d.link.view().linesBad);
    // Noise fails in more than one way (a non-printable byte, a bad checksum, an overlong run, ...).
    expect(reasons.length).toBeGreaterThanOrEqual(2);
    expect(buffered(d)).toBeLessThanOrEqual(MAX_LINE_BYTES + 1);
    expect(d.link.isReady).toBe(true);
    expect(statuses).toEqual([]);
    const ok = d.link.view().linesOk;
    await waitFor(() => d.link.view().linesOk > ok + 200, 10_000, 'valid lines again');
    // Disarmed, a burst of bad lines is a warning, not a trip: nothing can turn.
    await waitFor(() => warnings.includes('bad_line_burst'), 5000, 'bad-line burst warning');
    await expectUntripped(d, hostTrips);
    // And the bench can still be driven afterwards.
    await d.controller.arm();
    await waitFor(() => pty.bench.state.armed, 5000, 'armed after the noise');
    d.controller.stop('test');
    await waitFor(() => !pty.bench.state.armed, 5000, 'stopped');
  });

  it('random bytes while the motor turns: the bad-line burst rule trips and the output is cut', async () => {
    const { pty, d, hostTrips } = await setUp(33);
    await armInProcess(d, 0.25);
    await waitFor(() => pty.bench.state.output > 0.24, 5000, 'output up');
    const trips = hostTrips;
    let i = 0;
    // Noise until the bench trips (bounded: at most 8 MiB).
    while (d.controller.state !== 'tripped' && i < 128) await pty.writeRaw(noise(64 * 1024, 5000 + i++));
    await waitFor(() => d.controller.state === 'tripped', 10_000, 'tripped');
    await waitFor(() => pty.bench.state.output === 0, 5000, 'output cut');
    expect(pty.bench.state.armed).toBe(false);
    // Either the burst rule, or (if the noise hid every frame for long enough) the stale-telemetry rule.
    expect(trips.length).toBeGreaterThan(0);
    expect(['bad_line_burst', 'stale_telemetry', 'thrust_sensor_silent']).toContain(trips[0]);
    expect(d.link.isReady).toBe(true);
  });
});
