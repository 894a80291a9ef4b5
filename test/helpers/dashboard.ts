// What a person does at the dashboard before a run, for tests that drive a daemon over its WebSocket: wait
// for the bench, clear a heartbeat latch left from before (a loaded test machine can stall the virtual bench's
// process past its time-out while nobody is driving it), confirm the pre-arm checklist, arm, set the throttle.

import { CHECKLIST_IDS } from '../../server/api/messages.js';
import type { TestClient } from './ws-client.js';

export async function armFromDashboard(c: TestClient, throttle: number): Promise<void> {
  await c.until(() => c.bench.state === 'safe' || c.bench.state === 'tripped', 10_000, 'bench connected');
  if (c.bench.state === 'tripped') {
    if (c.bench.fault !== 'heartbeat') throw new Error(`bench tripped before arming: ${c.bench.reason}`);
    const r = await c.command({ type: 'clear' });
    if (!r.ok) throw new Error(`clear refused: ${r.error}`);
    await c.until(() => c.bench.state === 'safe', 10_000, 'safe after clear');
  }
  for (const msg of [{ type: 'checklist', items: [...CHECKLIST_IDS] }, { type: 'arm' }, { type: 'throttle', value: throttle }] as const) {
    const r = await c.command(msg as never);
    if (!r.ok) throw new Error(`${msg.type} refused: ${r.error} (bench ${c.bench.state}: ${c.bench.reason})`);
  }
}
