// The safety path never waits on the web side. On the real serial path (the virtual bench behind a pty in a
// process of its own, keeping wall-clock time and latching when the host's heartbeat stops for 300 ms), with
// the motor running: 200 dashboards connect at once (from another process) after the web side's history ring
// is as full as after an hour of 1 kHz telemetry, so each gets the largest snapshot there is; then the web
// side's event loop is blocked on purpose. The board must see no heartbeat gap long enough to cut, and the
// test reports the longest gap it saw. A web side blocked longer than a dashboard may be silent is taken as
// every dashboard lost: the host stops the motor itself (STOP, not the heartbeat latch).
// Needs dist/ (the web side's worker and the board's process run compiled code; npm test builds first).

import { afterEach, describe, expect, it } from 'vitest';
import { CONTROLLER_SILENCE_MS, HISTORY_CAPACITY, startDaemon } from '../server/daemon.js';
import { armInProcess } from './helpers/dashboard.js';
import { Crowd, seedHistory } from '../bench/crowd.js';
import { SimProcess, waitFor } from './helpers/sim-process.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function benchOnPty(seed: number, webSilenceMs = CONTROLLER_SILENCE_MS) {
  const sim = await SimProcess.start({ seed });
  cleanups.push(() => sim.close());
  const d = await startDaemon({ source: { kind: 'serial', path: sim.devicePath }, httpPort: 0, log: () => {}, webSilenceMs });
  cleanups.push(() => d.close());
  return { sim, d };
}

describe('a crowd of dashboards and a blocked web side, with a board that keeps wall-clock time', () => {
  // Retried once: on a loaded two-core machine (another suite's Chromium on the other core) the board's own
  // process or its pty relay can be starved past 300 ms, which this test cannot tell from the daemon. The
  // failure it exists for (web work on the bench's loop) is not intermittent: 200 snapshots built on one loop
  // stall it for seconds, every time.
  it('200 dashboards at once after an hour of history, then the web side blocked 2 s: no heartbeat cut', { retry: 1 }, async () => {
    const { sim, d } = await benchOnPty(91);
    seedHistory((s) => d.web.addSample(s), HISTORY_CAPACITY, 1000, Date.now());
    await d.firstConnect;
    expect(d.link.isReady).toBe(true);
    const timeoutMs = d.link.identity!.heartbeatTimeoutMs;
    await armInProcess(d, 0.3);
    await sim.until((s) => s.output > 0.29, 10_000, 'output up');
    await sim.heartbeats(true);

    const crowd = await Crowd.connect(d.port, d.token, 200);
    cleanups.push(() => crowd.close());
    expect(crowd.ready).toMatchObject({ snapshots: 200, failed: 0 });
    // Every one got the full window: 6,000 rows of every channel, some hundreds of kB each.
    expect(crowd.ready.bytes / 200).toBeGreaterThan(300_000);
    const stats = await d.web.stats();
    // Built once and shared (rebuilt only when the bench state changed or it aged), not once per client.
    expect(stats.snapshotsSent).toBeGreaterThanOrEqual(200);
    expect(stats.snapshotsBuilt).toBeLessThan(40);
    const afterCrowd = await sim.heartbeats(true);

    // The web side's loop blocked on purpose, well below the dashboards' silence limit.
    d.web.stall(2000);
    await waitFor(() => d.web.silentForMs() > 1500, 10_000, 'the web side stops answering');
    await waitFor(() => d.web.silentForMs() < 1000, 20_000, 'the web side answers again');
    const afterStall = await sim.heartbeats(true);

    const s = await sim.state();
    expect(s.fault, `board latched; longest gaps ${afterCrowd.maxGapMs} ms (crowd), ${afterStall.maxGapMs} ms (web side blocked)`).toBe('none');
    expect(s.mode).toBe('armed');
    expect(s.output).toBeCloseTo(0.3, 6);
    expect(d.controller.state).toBe('running');
    expect(afterCrowd.count).toBeGreaterThan(0);
    expect(afterStall.count).toBeGreaterThan(10);
    for (const w of [afterCrowd, afterStall]) expect(w.maxGapMs).toBeLessThan(timeoutMs);
    // The figures this test exists for (the board's own clock; heartbeat every 100 ms).
    console.info(
      `longest heartbeat gap at the board: ${afterCrowd.maxGapMs.toFixed(1)} ms while 200 dashboards connected (${afterCrowd.count} heartbeats), ` +
        `${afterStall.maxGapMs.toFixed(1)} ms with the web side blocked 2 s (${afterStall.count}); time-out ${timeoutMs} ms; ` +
        `${stats.snapshotsBuilt} snapshots built for ${stats.snapshotsSent} sent`,
    );
  });

  // Retried once, for the reason given above: a starved board process can latch on its own before the test.
  it('a web side blocked past the dashboards\' silence limit: the host stops the motor itself', { retry: 1 }, async () => {
    // A shorter silence limit than the default 4 s: less time for a loaded machine to starve the board first.
    const silence = 1500;
    const { sim, d } = await benchOnPty(92, silence);
    const said: string[] = [];
    d.controller.on('event', (e) => said.push(e.text));
    await d.firstConnect;
    await armInProcess(d, 0.25);
    await sim.until((s) => s.output > 0.24, 10_000, 'output up');
    await sim.heartbeats(true);
    d.web.stall(silence + 1500);
    const s = await sim.until((x) => x.mode === 'latched', silence + 10_000, 'stopped');
    // A STOP from the host, heartbeat still flowing: not the firmware's time-out.
    if (s.fault !== 'estop') throw new Error(`latched ${s.fault}; host said: ${said.join(' | ')}`);
    expect(s.fault).toBe('estop');
    expect(s.output).toBe(0);
    expect((await sim.heartbeats()).maxGapMs).toBeLessThan(d.link.identity!.heartbeatTimeoutMs);
    await waitFor(() => said.some((t) => /unresponsive/.test(t)), 5000, () => `the reason among the events: ${said.join(' | ')}`);
  });
});
