// A full disk while recording. The session store takes a size cap (maxDatabaseBytes) that fails writes
// exactly as a full disk does (SQLITE_FULL). The daemon does not expose the cap, so the recording is wired
// here as the daemon wires it (a SessionKeeper on the daemon's controller, fed every sample), against a store
// opened with a small cap. What must hold: arming, throttle and stop work exactly as before, ingest goes
// on, and the operator is told (the keeper's tell callback, which the daemon turns into an event).

import { mkdtempSync, rmSync, statSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import type { BenchEvent } from '../server/api/messages.js';
import { identityCalibration } from '../server/bench/calibration.js';
import { SessionKeeper } from '../server/bench/recording.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { DB_FILE, SessionStore } from '../server/store/store.js';
import { armInProcess } from './helpers/dashboard.js';
import { waitFor } from './helpers/sim-process.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function recordingDaemon(seed: number, capBytes: (emptyBytes: number) => number): Promise<{ d: RunningDaemon; store: SessionStore; keeper: SessionKeeper; told: BenchEvent[] }> {
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-robust-disk-'));
  cleanups.push(() => rmSync(dir, { recursive: true, force: true }));
  // The size of an empty store (schema only), to put the cap just above it.
  SessionStore.open(dir).close();
  const empty = statSync(join(dir, DB_FILE)).size;
  const store = SessionStore.open(dir, { maxDatabaseBytes: capBytes(empty), busyTimeoutMs: 20 });
  cleanups.push(() => store.close());
  const d = await startDaemon({ source: { kind: 'sim', seed }, httpPort: 0, log: () => {} });
  cleanups.push(() => d.close());
  await d.firstConnect;
  const told: BenchEvent[] = [];
  const keeper = new SessionKeeper(store, d.controller, () => ({ rig: null, calibration: identityCalibration(), atmosphere: null, firmware: d.link.identity }), (e) => told.push(e));
  cleanups.push(() => keeper.finish('aborted'));
  const off = d.onSample((s) => keeper.addSample(s));
  cleanups.push(off);
  return { d, store, keeper, told };
}

describe('a full disk while recording', () => {
  it('the store fills mid-run: control is unaffected and the operator is told', async () => {
    // Room for the session row and a few batches, then full.
    const { d, keeper, told } = await recordingDaemon(61, (empty) => empty + 16 * 4096);
    const sim = d.sim!;
    await armInProcess(d, 0.3);
    expect(keeper.sessionId).not.toBeNull();
    await waitFor(() => sim.state.output > 0.29, 5000, 'output up');
    await waitFor(() => told.some((e) => e.kind === 'recording' && e.level === 'error'), 15_000, 'operator told about the failing recording');
    const e = told.find((x) => x.kind === 'recording' && x.level === 'error')!;
    expect(e.text).toMatch(/SQLITE_FULL/);
    expect(e.text).toMatch(/bench control is unaffected/);

    // With the disk full, the bench still does exactly what it is told.
    let ingested = 0;
    const off = d.onSample(() => ingested++);
    cleanups.push(off);
    await d.controller.setThrottle(0.4);
    await waitFor(() => sim.state.output > 0.39, 5000, 'throttle change reached the device');
    await waitFor(() => ingested > 200, 10_000, 'ingest goes on');
    expect(d.controller.stop('test')).toBe(true);
    await waitFor(() => sim.state.output === 0, 5000, 'stop reached the device');
    expect(sim.state.fault).toBe('estop');
    await waitFor(() => d.controller.state === 'tripped', 5000, 'tripped');
    await d.controller.acknowledge();
    await waitFor(() => d.controller.state === 'safe', 5000, 'safe again');
  });

  it('the store is already full when arming: arming, throttle and stop still work', async () => {
    const { d, store, keeper } = await recordingDaemon(62, () => 1);
    const sim = d.sim!;
    fillCompletely(store);
    const errors = captureConsoleError();
    await armInProcess(d, 0.25);
    // No session could be created, and the bench does not care.
    expect(keeper.sessionId).toBeNull();
    await waitFor(() => sim.state.output > 0.24, 5000, 'output up');
    d.controller.stop('test');
    await waitFor(() => sim.state.output === 0, 5000, 'stop reached the device');
    expect(sim.state.armed).toBe(false);
    // The keeper contained the failure itself: no listener blew up.
    expect(errors.map(String).join(' ')).not.toMatch(/listener for transition failed/);
  });

  // With the disk already full when the operator arms, the operator is told that nothing is being recorded.
  it('the store is already full when arming: the operator is told', async () => {
    const { d, store, told } = await recordingDaemon(63, () => 1);
    fillCompletely(store);
    captureConsoleError();
    await d.controller.arm();
    await waitFor(() => d.sim!.state.armed, 5000, 'armed');
    await waitFor(() => told.some((e) => e.kind === 'recording' && e.level === 'error'), 3000, 'operator told');
  });
});

/** Fills what room is left under the cap, big rows then smaller ones, until even an empty session row is refused. */
function fillCompletely(store: SessionStore): void {
  for (const size of [4000, 1000, 200, 0]) {
    let full = false;
    for (let i = 0; i < 10_000 && !full; i++) {
      try {
        store.createSession({ title: 'filler', notes: 'n'.repeat(size) }, 'completed');
      } catch (err) {
        full = (err as { code?: string }).code === 'SQLITE_FULL';
        if (!full) throw err;
      }
    }
    expect(full, `filling with ${size}-byte rows`).toBe(true);
  }
}

function captureConsoleError(): unknown[] {
  const errors: unknown[] = [];
  const orig = console.error;
  console.error = (...a: unknown[]) => void errors.push(a.map(String).join(' '));
  cleanups.push(() => void (console.error = orig));
  return errors;
}
