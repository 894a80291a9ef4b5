// A trip is recorded in the session: the rule, the value, the limit and the offending sample, and the
// session ends as tripped.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { SessionStore } from '../server/store/store.js';

const cleanups: (() => unknown)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function until(check: () => boolean, ms: number, what: string): Promise<void> {
  const t0 = Date.now();
  while (!check()) {
    if (Date.now() - t0 > ms) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

describe('trip record', () => {
  it('the session holds the trip with rule, value, limit and sample, and its outcome is tripped', async () => {
    const dir = mkdtempSync(join(tmpdir(), 'ductbench-trip-'));
    cleanups.push(() => rmSync(dir, { recursive: true, force: true }));
    const d: RunningDaemon = await startDaemon({ source: { kind: 'sim', seed: 41 }, httpPort: 0, dataDir: dir, limits: { max_current_a: 6 }, log: () => {} });
    let closed = false;
    cleanups.push(() => (closed ? undefined : d.close()));
    await d.firstConnect;
    await d.controller.arm();
    const id = d.sessions!.sessionId;
    expect(id).not.toBeNull();
    await d.controller.setThrottle(0.75).catch(() => {}); // the trip ends the ramp
    await until(() => d.controller.state === 'tripped', 8000, 'the trip');
    await d.close();
    closed = true;
    const store = SessionStore.open(dir);
    cleanups.push(() => store.close());
    const s = store.get(id!);
    expect(s.outcome).toBe('tripped');
    const trip = s.events.find((e) => e.kind === 'trip' && e.data !== undefined);
    expect(trip, JSON.stringify(s.events.map((e) => e.kind))).toBeDefined();
    const data = trip!.data as { rule: string; value: number; limit: number; sample: { current: number | null } | null };
    expect(data.rule).toBe('max_current');
    expect(data.limit).toBe(6);
    expect(data.value).toBeGreaterThan(6);
    expect(data.sample?.current).toBeGreaterThan(6);
  });
});
