// One controller at a time: a viewer takes over only with the controller's consent or in its absence; the
// old controller becomes a viewer and the motor is not touched by the handover. A heartbeating controller
// that falls silent (a frozen page) while the motor turns is treated as lost: the motor stops.

import { afterEach, describe, expect, it } from 'vitest';
import type { ServerMessage } from '../server/api/messages.js';
import { CONTROLLER_SILENCE_MS, startDaemon, type RunningDaemon } from '../server/daemon.js';
import { TestClient } from './helpers/ws-client.js';

const open: { close(): unknown }[] = [];
afterEach(async () => {
  for (const o of open.splice(0).reverse()) await o.close();
});

async function setup(): Promise<{ d: RunningDaemon; a: TestClient; b: TestClient }> {
  const d = await startDaemon({ source: { kind: 'sim', seed: 31 }, httpPort: 0, log: () => {} });
  open.push(d);
  await d.firstConnect;
  const a = await TestClient.connect(d.port, d.token);
  const b = await TestClient.connect(d.port, d.token);
  open.push(a, b);
  expect(a.snapshot!.role).toBe('controller');
  expect(b.snapshot!.role).toBe('viewer');
  return { d, a, b };
}

const roleOf = (c: TestClient) => {
  for (let i = c.messages.length - 1; i >= 0; i--) {
    const m = c.messages[i];
    if (m.type === 'role') return m.role;
    if (m.type === 'snapshot') return m.role;
  }
  return null;
};

describe('controller takeover', () => {
  it('needs the controller to allow it; the motor keeps running through the handover', async () => {
    const { d, a, b } = await setup();
    await d.controller.arm();
    await d.controller.setThrottle(0.3);
    const asked = b.command({ type: 'takeover_request' });
    await a.until(() => a.messages.some((m) => m.type === 'takeover_asked'), 5000, 'controller asked');
    const req = a.messages.find((m): m is Extract<ServerMessage, { type: 'takeover_asked' }> => m.type === 'takeover_asked')!;
    expect((await a.command({ type: 'takeover_answer', request: req.request, allow: true })).ok).toBe(true);
    expect((await asked).ok).toBe(true);
    await b.until(() => roleOf(b) === 'controller', 3000, 'b controls');
    await a.until(() => roleOf(a) === 'viewer', 3000, 'a views');
    expect(d.sim!.state.output).toBeCloseTo(0.3, 3); // the handover did not touch the motor
    // the new controller commands; the old one cannot
    expect((await b.command({ type: 'throttle', value: 0.2 })).ok).toBe(true);
    const refused = await a.command({ type: 'throttle', value: 0.5 });
    expect(refused.ok).toBe(false);
    expect(d.sim!.state.commanded).toBeCloseTo(0.2, 3);
  });

  it('a declined request leaves the roles as they were', async () => {
    const { a, b } = await setup();
    const asked = b.command({ type: 'takeover_request' });
    await a.until(() => a.messages.some((m) => m.type === 'takeover_asked'), 5000, 'controller asked');
    const req = a.messages.find((m): m is Extract<ServerMessage, { type: 'takeover_asked' }> => m.type === 'takeover_asked')!;
    await a.command({ type: 'takeover_answer', request: req.request, allow: false });
    const r = await asked;
    expect(r.ok).toBe(false);
    expect(r.error).toMatch(/declined/);
    expect((await b.command({ type: 'arm' })).ok).toBe(false);
  });

  it('a viewer may answer nothing, and with no controller a request is granted at once', async () => {
    const { a, b } = await setup();
    expect((await b.command({ type: 'takeover_answer', request: 1, allow: true })).ok).toBe(false);
    a.close();
    await b.until(() => true, 100);
    await new Promise((r) => setTimeout(r, 200));
    expect((await b.command({ type: 'takeover_request' })).ok).toBe(true);
    await b.until(() => roleOf(b) === 'controller', 3000, 'b controls');
  });

  it('the controller leaving while asked is its answer', async () => {
    const { a, b } = await setup();
    const asked = b.command({ type: 'takeover_request' });
    await a.until(() => a.messages.some((m) => m.type === 'takeover_asked'), 5000, 'controller asked');
    a.ws.terminate();
    expect((await asked).ok).toBe(true);
    await b.until(() => roleOf(b) === 'controller', 3000, 'b controls');
  });
});

describe('controller liveness', () => {
  it('a heartbeating controller that falls silent while the motor turns stops the motor', async () => {
    const { d, a } = await setup();
    // a dashboard that heartbeats
    for (let i = 0; i < 3; i++) expect((await a.command({ type: 'ping' })).ok).toBe(true);
    await d.controller.arm();
    await d.controller.setThrottle(0.3);
    expect(d.sim!.state.output).toBeCloseTo(0.3, 3);
    // ... and then freezes (no more messages, socket still open)
    const t0 = Date.now();
    while (d.sim!.state.output !== 0 && Date.now() - t0 < CONTROLLER_SILENCE_MS + 5000) await new Promise((r) => setTimeout(r, 50));
    expect(d.sim!.state.output).toBe(0);
    expect(d.sim!.state.armed).toBe(false);
    expect(Date.now() - t0).toBeGreaterThanOrEqual(CONTROLLER_SILENCE_MS - 1000); // not before the silence limit
  });

  it('a controller that keeps its heartbeat keeps the motor running', async () => {
    const { d, a } = await setup();
    await a.command({ type: 'ping' });
    await d.controller.arm();
    await d.controller.setThrottle(0.25);
    const beat = setInterval(() => void a.command({ type: 'ping' }), 1000);
    try {
      await new Promise((r) => setTimeout(r, CONTROLLER_SILENCE_MS + 1500));
      expect(d.sim!.state.output).toBeCloseTo(0.25, 3);
    } finally {
      clearInterval(beat);
    }
  });
});
