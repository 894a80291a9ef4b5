// End to end through the daemon: the virtual bench in process and behind a real pseudo-terminal, a WebSocket
// client as the dashboard. Arm, throttle, see thrust; stop cuts the output; losing the controlling dashboard
// stops the motor.

import { afterEach, describe, expect, it } from 'vitest';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { runSimOnPty, type SimOnPty } from '../server/sim/index.js';
import { CHECKLIST_IDS } from '../server/api/messages.js';
import { TestClient } from './helpers/ws-client.js';

/** A dashboard confirms the pre-arm checklist before its first arm (test/daemon-sequences.test.ts checks the gate). */
async function confirmChecklist(c: TestClient): Promise<void> {
  expect((await c.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).ok).toBe(true);
}

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function simDaemon(): Promise<{ d: RunningDaemon; c: TestClient }> {
  const d = await startDaemon({ source: { kind: 'sim', seed: 7 }, httpPort: 0, log: () => {} });
  cleanups.push(() => d.close());
  await d.firstConnect;
  const c = await TestClient.connect(d.port, d.token);
  cleanups.push(() => c.close());
  await confirmChecklist(c);
  return { d, c };
}

describe('daemon with the in-process virtual bench', () => {
  it('streams samples, arms, spins up on throttle, and stop cuts the output at once', async () => {
    const { d, c } = await simDaemon();
    expect(c.snapshot!.identity?.firmware).toBe('vbench');
    await c.until(() => c.samples.t.length > 20, 5000, 'samples');
    expect((await c.command({ type: 'arm' })).ok).toBe(true);
    await c.until(() => c.bench.state === 'armed', 5000, 'armed');
    expect((await c.command({ type: 'throttle', value: 0.5 })).ok).toBe(true);
    await c.until(() => (c.lastThrust() ?? 0) > 2, 10_000, 'thrust above 2 N');
    expect(c.bench.state).toBe('running');
    const cutAt = c.samples.t.length;
    expect((await c.command({ type: 'stop' })).ok).toBe(true);
    // the firmware's output is zero as soon as the STOP line is handled
    await c.until(() => d.sim!.state.output === 0, 1000, 'device output zero');
    expect(d.sim!.state.armed).toBe(false);
    expect(d.sim!.state.fault).toBe('estop');
    await c.until(() => c.bench.state === 'tripped', 2000, 'tripped');
    // telemetry after the cut reports out=0 within one status period
    await c.until(() => c.samples.out.slice(cutAt).some((o) => o === 0), 2000, 'out=0 in telemetry');
    // acknowledging clears the device latch and leaves it disarmed
    expect((await c.command({ type: 'clear' })).ok).toBe(true);
    await c.until(() => c.bench.state === 'safe', 2000, 'safe');
    expect(d.sim!.state.fault).toBe('none');
    expect(d.sim!.state.armed).toBe(false);
  });

  it('refuses throttle above the device ceiling without touching the motor', async () => {
    const { d, c } = await simDaemon();
    await c.command({ type: 'arm' });
    await c.until(() => c.bench.state === 'armed');
    const r = await c.command({ type: 'throttle', value: 0.95 });
    expect(r.ok).toBe(false);
    expect(r.error).toMatch(/ceiling/);
    expect(d.sim!.state.commanded).toBe(0);
  });

  it('arming is refused while not safe, throttle refused while disarmed', async () => {
    const { c } = await simDaemon();
    const t = await c.command({ type: 'throttle', value: 0.2 });
    expect(t.ok).toBe(false);
    expect(t.error).toMatch(/safe/);
  });

  it('losing the controlling dashboard while running stops the motor', async () => {
    const { d, c } = await simDaemon();
    await c.command({ type: 'arm' });
    await c.until(() => c.bench.state === 'armed');
    await c.command({ type: 'throttle', value: 0.3 });
    await c.until(() => d.sim!.state.output > 0.29, 3000, 'output up');
    c.ws.terminate(); // a crashed browser tab: no close handshake
    const t0 = Date.now();
    while (d.sim!.state.output !== 0 && Date.now() - t0 < 3000) await new Promise((r) => setTimeout(r, 10));
    expect(d.sim!.state.output).toBe(0);
    expect(d.sim!.state.armed).toBe(false);
  });
});

describe('daemon with the virtual bench behind a real pseudo-terminal', () => {
  it('handshakes through the OS serial path, streams, and stop cuts the output', async () => {
    const sim: SimOnPty = await runSimOnPty({ seed: 3 });
    cleanups.push(() => sim.close());
    const d = await startDaemon({ source: { kind: 'serial', path: sim.devicePath }, httpPort: 0, log: () => {} });
    cleanups.push(() => d.close());
    await d.firstConnect;
    expect(d.link.isReady).toBe(true);
    expect(d.link.view().source).toContain(sim.devicePath);
    const c = await TestClient.connect(d.port, d.token);
    cleanups.push(() => c.close());
    await c.until(() => c.samples.t.length > 50, 5000, 'samples over the pty');
    await confirmChecklist(c);
    expect((await c.command({ type: 'arm' })).ok).toBe(true);
    expect((await c.command({ type: 'throttle', value: 0.4 })).ok).toBe(true);
    await c.until(() => sim.bench.state.output > 0.39, 3000, 'output up');
    await c.until(() => (c.lastThrust() ?? 0) > 1, 10_000, 'thrust over the pty');
    await c.command({ type: 'stop' });
    await c.until(() => sim.bench.state.output === 0, 1000, 'output cut');
    expect(sim.bench.state.fault).toBe('estop');
    expect(d.link.view().linesBad).toEqual({});
  });

  it('reconnects after the pseudo-terminal goes away and comes back, and stays disarmed', async () => {
    const link = `/tmp/ductbench-test-${process.pid}-${Date.now()}`;
    let sim = await runSimOnPty({ seed: 4, link });
    const d = await startDaemon({ source: { kind: 'serial', path: link }, httpPort: 0, log: () => {}, link: { reconnectInitialMs: 100, reconnectMaxMs: 400 } });
    cleanups.push(() => d.close());
    await d.firstConnect;
    await d.controller.arm();
    await d.controller.setThrottle(0.3);
    const lost = new Promise<void>((r) => d.link.once('lost', () => r()));
    await sim.close(); // the cable is pulled
    await lost;
    expect(d.controller.state).toBe('disconnected');
    sim = await runSimOnPty({ seed: 5, link }); // a fresh board on the same port
    cleanups.push(() => sim.close());
    await new Promise<void>((r) => d.link.once('ready', () => r()));
    expect(d.controller.state).toBe('safe');
    expect(sim.bench.state.armed).toBe(false);
    expect(d.link.view().reconnects).toBeGreaterThanOrEqual(1);
  });
});
