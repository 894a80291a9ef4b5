// Arming as a person does it, for tests: wait for the bench, clear a heartbeat latch, confirm the pre-arm
// checklist, arm, set the throttle. A loaded test machine can stall the virtual bench or the daemon past the
// 300 ms heartbeat time-out, and the device then latches 'heartbeat' by itself: the fail-safe answer, not
// what these tests are about. So a heartbeat latch before the motor is up is cleared and the arming repeated
// (a few times at most); any other refusal fails the test at once.

import { CHECKLIST_IDS } from '../../server/api/messages.js';
import type { RunningDaemon } from '../../server/daemon.js';
import type { TestClient } from './ws-client.js';

const ATTEMPTS = 4;

/** Over the dashboard's WebSocket. */
export async function armFromDashboard(c: TestClient, throttle: number): Promise<void> {
  let why = '';
  for (let attempt = 0; attempt < ATTEMPTS; attempt++) {
    await c.until(() => c.bench.state === 'safe' || c.bench.state === 'tripped', 10_000, 'bench connected');
    if (c.bench.state === 'tripped') {
      if (c.bench.fault !== 'heartbeat') throw new Error(`bench tripped before arming: ${c.bench.reason}`);
      const r = await c.command({ type: 'clear' });
      if (!r.ok) throw new Error(`clear refused: ${r.error}`);
      await c.until(() => c.bench.state === 'safe', 10_000, 'safe after clear');
    }
    let failed = false;
    for (const msg of [{ type: 'checklist', items: [...CHECKLIST_IDS] }, { type: 'arm' }, { type: 'throttle', value: throttle }] as const) {
      const r = await c.command(msg as never);
      if (r.ok) continue;
      why = `${msg.type} refused: ${r.error} (bench ${c.bench.state}: ${c.bench.reason})`;
      // The refusal may come before the device's latch reaches the dashboard: wait for it.
      await c.until(() => c.bench.fault !== 'none', 5000, 'the reason for the refusal').catch(() => {});
      if (c.bench.fault !== 'heartbeat') throw new Error(why);
      await c.until(() => c.bench.state === 'tripped', 5000, 'tripped');
      failed = true;
      break;
    }
    if (!failed) return;
  }
  throw new Error(`could not arm in ${ATTEMPTS} attempts: ${why}`);
}

/** Through the daemon's controller, in process. */
export async function armInProcess(d: RunningDaemon, throttle: number): Promise<void> {
  let why = '';
  for (let attempt = 0; attempt < ATTEMPTS; attempt++) {
    if (d.controller.state === 'tripped') {
      if (d.controller.view().fault !== 'heartbeat') throw new Error(`bench tripped before arming: ${d.controller.view().reason}`);
      await d.controller.acknowledge();
    }
    try {
      await d.controller.arm();
      await d.controller.setThrottle(throttle);
      return;
    } catch (err) {
      why = `${(err as Error).message} (bench ${d.controller.state}: ${d.controller.view().reason})`;
      // The refusal may come before the device's latch reaches the host (a THR refused as latched, a ramp
      // ended by the trip): wait for it, then retry only if the latch is a heartbeat loss.
      const t0 = Date.now();
      while (d.controller.view().fault === 'none' && Date.now() - t0 < 5000) await new Promise((r) => setTimeout(r, 20));
      if (d.controller.view().fault !== 'heartbeat') throw err;
      while (d.controller.state !== 'tripped' && Date.now() - t0 < 5000) await new Promise((r) => setTimeout(r, 20));
    }
  }
  throw new Error(`could not arm in ${ATTEMPTS} attempts: ${why}`);
}
