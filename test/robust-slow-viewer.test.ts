// A frozen dashboard (a tab in a suspended laptop, a browser stuck in a debugger) must never delay ingest or
// control. The frozen client stops reading its socket; a second, controlling client arms, throttles and
// stops; the stop reaches the device, the daemon keeps ingesting, the frozen client's sample batches are
// dropped, and once its buffer passes the hard cap it is disconnected.

import { CHECKLIST_IDS } from '../server/api/messages.js';
import { afterEach, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { HARD_CAP_BYTES, SAMPLE_DROP_BYTES, type Client } from '../server/http/hub.js';
import { waitFor } from './helpers/sim-process.js';
import { TestClient } from './helpers/ws-client.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

function hubClients(d: RunningDaemon): Client[] {
  return [...(d.hub as unknown as { clients: Map<number, Client> }).clients.values()];
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
    await waitFor(() => hubClients(d).some((c) => c.role === 'viewer'), 5000, 'viewer registered');
    const viewer = hubClients(d).find((c) => c.role === 'viewer')!;

    // Loopback socket buffers swallow megabytes before the daemon's own buffer grows; at the bench's few tens
    // of kB/s that would take minutes. Queue large (legitimate, non-droppable) extras messages for this client
    // until its buffer is over the drop threshold, as a big snapshot on a slow link would.
    const filler = { type: 'extras' as const, extras: { filler: 'x'.repeat(1024 * 1024) } };
    for (let i = 0; i < 64 && viewer.ws.bufferedAmount <= SAMPLE_DROP_BYTES; i++) {
      d.hub.send(viewer, filler);
      await new Promise((r) => setImmediate(r));
    }
    expect(viewer.ws.bufferedAmount).toBeGreaterThan(SAMPLE_DROP_BYTES);
    await waitFor(() => viewer.droppedBatches > 0, 5000, 'batches dropped for the frozen client');

    // Control and ingest go on as if the frozen client were not there.
    let ingested = 0;
    const off = d.onSample(() => ingested++);
    cleanups.push(off);
    const ctlMessagesBefore = ctl.messages.length;
    const bufferedBefore = viewer.ws.bufferedAmount;
    const droppedBefore = viewer.droppedBatches;
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
    expect(viewer.droppedBatches).toBeGreaterThan(droppedBefore);
    expect(viewer.ws.bufferedAmount - bufferedBefore).toBeLessThan(sampleBytes / 2);

    // Past the hard cap the next message disconnects it; the controller stays connected.
    for (let i = 0; i < 64 && viewer.ws.bufferedAmount <= HARD_CAP_BYTES; i++) {
      d.hub.send(viewer, filler);
      await new Promise((r) => setImmediate(r));
    }
    d.hub.broadcast({ type: 'extras', extras: {} });
    await waitFor(() => !hubClients(d).includes(viewer), 5000, 'frozen client disconnected');
    expect(hubClients(d).map((c) => c.role)).toEqual(['controller']);
    expect(ctl.ws.readyState).toBe(WebSocket.OPEN);
    expect((await ctl.command({ type: 'ping' })).ok).toBe(true);
  });
});
