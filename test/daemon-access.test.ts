// The daemon's WebSocket and HTTP surface: refusals before the handshake (token, Origin, Host), the snapshot
// on connect, schema-checked messages, roles, and stop from any dashboard.

import { request } from 'node:http';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { MAX_CLIENT_MESSAGE_BYTES, type ServerMessage, type Snapshot } from '../server/api/messages.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { ScriptedDevice } from './helpers/scripted-device.js';

let d: RunningDaemon;
let dev: ScriptedDevice;

beforeAll(async () => {
  dev = new ScriptedDevice();
  d = await startDaemon({ source: { kind: 'custom', transport: () => dev }, httpPort: 0, token: 'test-token-123', log: () => {} });
  await d.firstConnect;
});
afterAll(async () => {
  await d.close();
});

/** Attempts an upgrade and reports the HTTP status of a refusal, or 101 when it opened. */
function tryUpgrade(path: string, headers: Record<string, string> = {}): Promise<number> {
  return new Promise((resolve) => {
    const ws = new WebSocket(`ws://127.0.0.1:${d.port}${path}`, { headers });
    ws.on('unexpected-response', (_req, res) => {
      resolve(res.statusCode ?? 0);
      ws.terminate();
    });
    ws.on('open', () => {
      resolve(101);
      ws.close();
    });
    ws.on('error', () => {});
  });
}

interface Conn {
  ws: WebSocket;
  messages: ServerMessage[];
  next(pred: (m: ServerMessage) => boolean, ms?: number): Promise<ServerMessage>;
  send(m: unknown): void;
}

async function connect(): Promise<Conn> {
  const ws = new WebSocket(`ws://127.0.0.1:${d.port}/ws?token=test-token-123`, { headers: { origin: `http://127.0.0.1:${d.port}` } });
  const messages: ServerMessage[] = [];
  const waiters: { pred: (m: ServerMessage) => boolean; resolve: (m: ServerMessage) => void }[] = [];
  ws.on('message', (data) => {
    const m = JSON.parse(data.toString()) as ServerMessage;
    messages.push(m);
    for (const w of [...waiters]) if (w.pred(m)) {
      waiters.splice(waiters.indexOf(w), 1);
      w.resolve(m);
    }
  });
  await new Promise((r) => ws.once('open', r));
  return {
    ws,
    messages,
    send: (m) => ws.send(typeof m === 'string' ? m : JSON.stringify(m)),
    next: (pred, ms = 5000) => {
      const found = messages.find(pred);
      if (found) {
        messages.splice(messages.indexOf(found), 1);
        return Promise.resolve(found);
      }
      return new Promise((resolve, reject) => {
        const timer = setTimeout(() => reject(new Error('timed out waiting for message')), ms);
        waiters.push({ pred, resolve: (m) => {
          clearTimeout(timer);
          messages.splice(messages.indexOf(m), 1);
          resolve(m);
        } });
      });
    },
  };
}

describe('daemon access control', () => {
  it('refuses an upgrade with no token or a wrong token (401)', async () => {
    expect(await tryUpgrade('/ws')).toBe(401);
    expect(await tryUpgrade('/ws?token=wrong')).toBe(401);
    expect(await tryUpgrade('/ws?token=test-token-12')).toBe(401);
  });
  it('refuses a foreign Origin even with the right token (403)', async () => {
    expect(await tryUpgrade('/ws?token=test-token-123', { origin: 'http://attacker.example' })).toBe(403);
    expect(await tryUpgrade('/ws?token=test-token-123', { origin: `http://localhost.:${d.port}` })).toBe(403);
  });
  it('refuses a foreign Host (DNS rebinding) with 421', async () => {
    expect(await tryUpgrade('/ws?token=test-token-123', { host: 'attacker.example' })).toBe(421);
    expect(await tryUpgrade('/ws?token=test-token-123', { host: `2130706433:${d.port}` })).toBe(421);
  });
  it('accepts the right token from the daemon origin', async () => {
    expect(await tryUpgrade('/ws?token=test-token-123', { origin: `http://127.0.0.1:${d.port}` })).toBe(101);
    expect(await tryUpgrade('/ws?token=test-token-123', { origin: `http://localhost:${d.port}` })).toBe(101);
  });
  it('guards the HTTP API with the token too', async () => {
    const get = (path: string, headers: Record<string, string> = {}) =>
      new Promise<number>((resolve) => {
        request({ host: '127.0.0.1', port: d.port, path, headers }, (res) => {
          res.resume();
          resolve(res.statusCode ?? 0);
        }).end();
      });
    expect(await get('/api/status')).toBe(401);
    expect(await get('/api/status?token=test-token-123')).toBe(200);
    expect(await get('/api/status', { authorization: 'Bearer test-token-123' })).toBe(200);
    expect(await get('/api/status?token=test-token-123', { host: 'evil.example' })).toBe(421);
  });
});

describe('daemon WebSocket API', () => {
  it('sends a snapshot first: controller role, bench safe, identity', async () => {
    const c = await connect();
    const s = (await c.next((m) => m.type === 'snapshot')) as Snapshot;
    expect(s.role).toBe('controller');
    expect(s.bench.state).toBe('safe');
    expect(s.identity?.firmware).toBe('scripted');
    expect(s.link.status).toBe('ready');
    const v = await connect();
    const vs = (await v.next((m) => m.type === 'snapshot')) as Snapshot;
    expect(vs.role).toBe('viewer');
    // a viewer cannot command the bench ...
    v.send({ type: 'arm', id: 7 });
    const r = await v.next((m) => m.type === 'reply' && m.id === 7);
    expect(r).toMatchObject({ ok: false });
    expect(dev.received.some((f) => f.tag === 'ARM')).toBe(false);
    // ... but anyone may stop it
    v.send({ type: 'stop', id: 8 });
    expect(await v.next((m) => m.type === 'reply' && m.id === 8)).toMatchObject({ ok: true });
    await new Promise((res) => setTimeout(res, 50));
    expect(dev.received.some((f) => f.tag === 'STOP')).toBe(true);
    c.ws.close();
    v.ws.close();
  });

  it('refuses malformed, unknown and out-of-range messages with an error, never clamping', async () => {
    const c = await connect();
    await c.next((m) => m.type === 'snapshot');
    const before = dev.received.filter((f) => f.tag === 'THR').length;
    const cases: unknown[] = [
      'not json',
      '[1,2]',
      { type: 'launch' },
      { type: 'throttle', value: 1.5, id: 1 },
      { type: 'throttle', value: -0.1 },
      { type: 'throttle', value: '0.5' },
      { type: 'throttle', value: 1e309 }, // JSON Infinity: parses to Infinity
      { type: 'throttle' },
      { type: 'arm', extra: true },
      { type: 'arm', id: -3 },
    ];
    for (const m of cases) {
      c.send(typeof m === 'string' ? m : JSON.stringify(m).replace('1e+309', '1e309'));
      const r = await c.next((x) => x.type === 'reply');
      expect(r, JSON.stringify(m)).toMatchObject({ ok: false });
    }
    expect(dev.received.filter((f) => f.tag === 'THR').length).toBe(before);
    c.ws.close();
  });

  it('closes an oversized message', async () => {
    const c = await connect();
    await c.next((m) => m.type === 'snapshot');
    const closed = new Promise<number>((r) => c.ws.once('close', (code) => r(code)));
    c.send(JSON.stringify({ type: 'ping', pad: 'x'.repeat(MAX_CLIENT_MESSAGE_BYTES + 10) }));
    expect(await closed).toBe(1009); // message too big
  });
});
