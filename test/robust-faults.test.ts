// An unplug and a controller reset in the middle of a guided sweep, through the whole daemon (in-process
// virtual bench, session recording on). What must hold: the firmware cuts by itself, the run and its session
// end as interrupted (or tripped), the daemon reconnects or re-identifies the device, and nothing arms again
// by itself afterwards: not the host, not the device.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import type { BenchEvent, BenchState } from '../server/api/messages.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { loadSequence, SequenceRunner, type RunResult } from '../server/sequence/index.js';
import { SessionStore } from '../server/store/store.js';
import { armInProcess } from './helpers/dashboard.js';
import { waitFor } from './helpers/sim-process.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

interface Rig {
  d: RunningDaemon;
  dir: string;
  states: BenchState[];
  events: BenchEvent[];
}

async function daemonWithStore(seed: number): Promise<Rig> {
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-robust-faults-'));
  cleanups.push(() => rmSync(dir, { recursive: true, force: true }));
  const d = await startDaemon({
    source: { kind: 'sim', seed },
    httpPort: 0,
    dataDir: dir,
    log: () => {},
    // The prediction-deviation rule is not under test here (see test/sequence-runner.test.ts).
    limits: { deviation_warn_pct: 500, deviation_trip_pct: 1000 },
    link: { reconnectInitialMs: 100, reconnectMaxMs: 400 },
  });
  cleanups.push(() => d.close());
  await d.firstConnect;
  expect(d.link.isReady).toBe(true);
  const states: BenchState[] = [];
  const events: BenchEvent[] = [];
  d.controller.on('transition', (tr) => states.push(tr.to));
  d.controller.on('event', (e) => events.push(e));
  return { d, dir, states, events };
}

/** A sweep as `ductbench run` does it: a managed session, the runner's outcome written to it. */
function startSweep(d: RunningDaemon): { sessionId: number; done: Promise<RunResult>; runner: SequenceRunner } {
  const plan = loadSequence({ name: 'robust sweep', steps: [{ staircase: { start: 0.2, stop: 0.5, step: 0.1, hold_s: 4, ramp_s: 0.5, window_s: 1 } }] });
  const runner = new SequenceRunner({ controller: d.controller, onSample: (fn) => d.onSample(fn), identity: () => d.link.identity }, plan);
  const sessionId = d.sessions!.prepare({ title: plan.name, managed: true, sequence: plan })!;
  const done = runner.start().then((r) => {
    d.sessions!.finish(r.outcome);
    return r;
  });
  return { sessionId, done, runner };
}

function storedOutcome(dir: string, id: number): string {
  // A second handle on the same file, as `ductbench sessions` would open it; no recovery from here.
  const s = SessionStore.open(dir, { recover: false });
  try {
    return s.get(id).outcome;
  } finally {
    s.close();
  }
}

/** Lets the bench run for `samples` more telemetry frames (a condition, not a sleep). */
async function moreSamples(d: RunningDaemon, samples: number, timeoutMs = 10_000): Promise<void> {
  let n = 0;
  const off = d.onSample(() => n++);
  try {
    await waitFor(() => n >= samples, timeoutMs, `${samples} more samples`);
  } finally {
    off();
  }
}

describe('unplug mid-sweep', () => {
  it('the firmware cuts on heartbeat loss, the run and session are interrupted, the daemon reconnects disarmed', async () => {
    const { d, dir, states } = await daemonWithStore(21);
    const sim = d.sim!;
    const { sessionId, done } = startSweep(d);
    await waitFor(() => sim.state.output >= 0.15, 20_000, 'output up mid-sweep');
    const fwBefore = sim.transitions.length;
    const statesBefore = states.length;
    sim.injectFault('unplug', { duration_ms: 800 });

    const result = await done;
    expect(result.outcome).toBe('interrupted');
    expect(result.reason).toMatch(/link lost/);
    // The cable is out: no STOP can arrive, so the cut is the firmware's own.
    await waitFor(() => sim.state.fault === 'heartbeat', 5000, 'heartbeat latch on the device');
    expect(sim.state.output).toBe(0);
    expect(sim.state.armed).toBe(false);

    await waitFor(() => d.link.isReady && d.controller.state !== 'connecting' && d.controller.state !== 'disconnected', 10_000, 'reconnected');
    expect(d.link.view().reconnects).toBeGreaterThanOrEqual(1);
    // After the reconnect the latch is still there (a new host session never clears it), and nothing arms.
    await moreSamples(d, 300);
    expect(['safe', 'tripped']).toContain(d.controller.state);
    expect(d.controller.view().armed).toBe(false);
    expect(d.controller.state).toBe('tripped');
    expect(sim.state.fault).toBe('heartbeat');
    expect(sim.state.armed).toBe(false);
    expect(sim.state.output).toBe(0);
    expect(states.slice(statesBefore)).not.toContain('armed');
    expect(states.slice(statesBefore)).not.toContain('running');
    expect(sim.transitions.slice(fwBefore).map((t) => t.to)).not.toContain('armed');
    expect(storedOutcome(dir, sessionId)).toBe('interrupted');
  });

  it('a dashboard-style session (armed by hand) is ended as interrupted by the unplug', async () => {
    const { d, dir } = await daemonWithStore(22);
    const sim = d.sim!;
    await armInProcess(d, 0.3);
    const id = d.sessions!.sessionId;
    expect(id).not.toBeNull();
    await waitFor(() => sim.state.output > 0.29, 5000, 'output up');
    sim.injectFault('unplug', { duration_ms: 600 });
    await waitFor(() => d.controller.state === 'disconnected', 5000, 'link lost');
    expect(d.sessions!.sessionId).toBeNull();
    expect(storedOutcome(dir, id!)).toBe('interrupted');
    await waitFor(() => sim.state.fault === 'heartbeat', 5000, 'heartbeat latch');
    expect(sim.state.output).toBe(0);
    await waitFor(() => d.link.isReady, 10_000, 'reconnected');
    await moreSamples(d, 200);
    expect(d.controller.view().armed).toBe(false);
    expect(sim.state.armed).toBe(false);
    // No new session was opened by the reconnect: only arming starts one.
    expect(d.sessions!.sessionId).toBeNull();
  });
});

describe('controller reset mid-sweep', () => {
  it('the host notices the new IDENT, the bench ends tripped and disarmed, nothing re-arms', async () => {
    const { d, dir, states, events } = await daemonWithStore(23);
    const sim = d.sim!;
    const { sessionId, done } = startSweep(d);
    await waitFor(() => sim.state.output >= 0.15, 20_000, 'output up mid-sweep');
    const statesBefore = states.length;
    const resetsBefore = sim.transitions.length;
    sim.injectFault('reset', { down_ms: 80 });

    const result = await done;
    expect(result.outcome).not.toBe('completed');
    expect(['tripped', 'interrupted']).toContain(result.outcome);
    await waitFor(() => events.some((e) => /device restarted/.test(e.text)), 5000, 'the host saw the new IDENT');
    // The restarted controller latched 'reset' and stays disarmed until someone clears it deliberately.
    await waitFor(() => d.controller.state === 'tripped', 5000, 'bench tripped');
    await moreSamples(d, 300);
    expect(d.controller.state).toBe('tripped');
    expect(d.controller.view().armed).toBe(false);
    expect(d.controller.view().fault).toBe('reset');
    expect(sim.state.fault).toBe('reset');
    expect(sim.state.armed).toBe(false);
    expect(sim.state.output).toBe(0);
    expect(states.slice(statesBefore)).not.toContain('armed');
    expect(states.slice(statesBefore)).not.toContain('running');
    expect(sim.transitions.slice(resetsBefore).map((t) => t.to)).not.toContain('armed');
    expect(storedOutcome(dir, sessionId)).toBe(result.outcome);
    // The host handshakes again on the same connection (see the next test), and still nothing arms by itself.
    await waitFor(() => sim.state.handshaken, 5000, 'handshake repeated after the reboot');
    await expect(d.controller.arm()).rejects.toThrow(/tripped/);
  });

  // On an IDENT while ready the link says HELLO again, so the restarted device is handshaken and the operator
  // can clear its 'reset' latch without a reconnect.
  it('after a reset the operator can clear the latch without reconnecting', async () => {
    const { d } = await daemonWithStore(24);
    const sim = d.sim!;
    await d.controller.arm();
    sim.injectFault('reset', { down_ms: 80 });
    await waitFor(() => d.controller.state === 'tripped' && d.controller.view().fault === 'reset', 5000, 'tripped by the reset');
    await d.controller.acknowledge();
    await waitFor(() => d.controller.state === 'safe', 5000, 'safe after clear');
    expect(sim.state.fault).toBe('none');
    expect(sim.state.armed).toBe(false);
  });
});
