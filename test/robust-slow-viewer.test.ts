// A frozen dashboard (a tab in a suspended laptop, a browser stuck in a debugger) must never delay ingest or
// control. The frozen client stops reading its socket; a second, controlling client arms, throttles and
// stops; the stop reaches the device, the daemon keeps ingesting, the frozen client's sample batches are
// dropped, and once its buffer passes the hard cap it is disconnected.

import { CHECKLIST_IDS } from '../server/api/messages.js';
import { afterEach, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { HARD_CAP_BYTES, SAMPLE_DROP_BYTES } from '../server/http/hub.js';
import type { ClientStat } from '../server/web/bridge.js';
import { waitFor } from './helpers/sim-process.js';
import { TestClient } from './helpers/ws-client.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

/** The web side's view of its clients (it runs on a worker thread: asked, not read). */
async function hubClients(d: RunningDaemon): Promise<ClientStat[]> {
  return (await d.web.stats()).clients;
}

describe('a frozen WebSocket viewer', () => {
  it('never delays ingest or control; its batches are dropped and it is cut off past the hard cap', async () => {
    const d = await startDaemon({ source: { kind: 'sim', seed: 41 }, httpPort: 0, log: () => {} });
    cleanups.push(() => d.close());
    await d.firstConnect;
    const ctl = await TestClient.connect(d.port, d.token);
    cleanups.push(() => ctl.close());
    expect(ctl.snapshot!.role).toBe('controller');

    const frozen = new WebSocket(`ws://127.0.0.1:${d.port}/ws?token=${encodeURIComponent(d.token)}`);
    frozen.on('error', () => {});
    cleanups.push(() => frozen.terminate());
    await new Promise<void>((r) => frozen.once('open', () => r()));
    // Stop reading: bytes pile up in the kernel, then in the daemon's per-client buffer.
    (frozen as unknown as { _socket: { pause(): void } })._socket.pause();
    await waitFor(async () => (await hubClients(d)).some((c) => c.role === 'viewer'), 5000, 'viewer registered');
    const viewerId = (await hubClients(d)).find((c) => c.role === 'viewer')!.id;
    const viewer = async () => (await hubClients(d)).find((c) => c.id === viewerId);

    // Loopback socket buffers swallow megabytes before the daemon's own buffer grows; at the bench's few tens
    // of kB/s that would take minutes. Queue large (legitimate, non-droppable) extras messages for this client
    // until its buffer is over the drop threshold, as a big snapshot on a slow link would. (To every client:
    // the controller reads its copy.)
    const filler = { type: 'extras' as const, extras: { filler: 'x'.repeat(1024 * 1024) } };
    for (let i = 0; i < 64 && (await viewer())!.bufferedAmount <= SAMPLE_DROP_BYTES; i++) d.web.broadcast(filler);
    expect((await viewer())!.bufferedAmount).toBeGreaterThan(SAMPLE_DROP_BYTES);
    await waitFor(async () => (await viewer())!.droppedBatches > 0, 5000, 'batches dropped for the frozen client');

    // Control and ingest go on as if the frozen client were not there.
    let ingested = 0;
    const off = d.onSample(() => ingested++);
    cleanups.push(off);
    const ctlMessagesBefore = ctl.messages.length;
    const before = (await viewer())!;
    const bufferedBefore = before.bufferedAmount;
    const droppedBefore = before.droppedBatches;
    // The dashboard's pre-arm checklist gate (the daemon refuses arm until it is confirmed).
    expect(await ctl.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).toEqual({ ok: true });
    expect(await ctl.command({ type: 'arm' })).toEqual({ ok: true });
    expect(await ctl.command({ type: 'throttle', value: 0.3 })).toEqual({ ok: true });
    await waitFor(() => d.sim!.state.output > 0.29, 5000, 'output up');
    await ctl.until(() => (ctl.lastThrust() ?? 0) > 0.5, 10_000, 'thrust seen by the controller');
    expect((await ctl.command({ type: 'stop' })).ok).toBe(true);
    await waitFor(() => d.sim!.state.output === 0, 5000, 'stop reached the device');
    expect(d.sim!.state.fault).toBe('estop');
    await waitFor(() => ingested > 500, 10_000, 'ingest kept counting');

    // What the controller received meanwhile went to the frozen client only as small state messages: its
    // buffer grew by far less than the sample traffic, because every batch for it was dropped.
    const sampleBytes = ctl.messages
      .slice(ctlMessagesBefore)
      .filter((m) => m.type === 'samples')
      .reduce((a, m) => a + JSON.stringify(m).length, 0);
    expect(sampleBytes).toBeGreaterThan(0);
    const after = (await viewer())!;
    expect(after.droppedBatches).toBeGreaterThan(droppedBefore);
    expect(after.bufferedAmount - bufferedBefore).toBeLessThan(sampleBytes / 2);

    // Past the hard cap the next message disconnects it; the controller stays connected.
    for (let i = 0; i < 64 && ((await viewer())?.bufferedAmount ?? Infinity) <= HARD_CAP_BYTES; i++) d.web.broadcast(filler);
    d.web.broadcast({ type: 'extras', extras: {} });
    await waitFor(async () => (await viewer()) === undefined, 5000, 'frozen client disconnected');
    expect((await hubClients(d)).map((c) => c.role)).toEqual(['controller']);
    expect(ctl.ws.readyState).toBe(WebSocket.OPEN);
    expect((await ctl.command({ type: 'ping' })).ok).toBe(true);
  });
});
