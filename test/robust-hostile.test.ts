// Hostile WebSocket clients, beyond test/daemon-access.test.ts: message floods (refused by the rate limit,
// while stop still works), binary frames, NaN- and Infinity-like throttle values (refused, never clamped), a
// viewer trying every command, odd spellings of the Host header and foreign Origins (refused before the
// handshake, on a raw socket so nothing normalises them), and the token kept out of every log line.

import { connect } from 'node:net';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import WebSocket from 'ws';
import { CHECKLIST_IDS, type ServerMessage } from '../server/api/messages.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { assertBuilt, DaemonProcess, SimProcess, waitFor } from './helpers/sim-process.js';
import { armFromDashboard } from './helpers/dashboard.js';
import { TestClient } from './helpers/ws-client.js';

const TOKEN = 'hostile-test-token-5b7e1c';
let d: RunningDaemon;
const logs: string[] = [];
const written: { tag: string; line: string }[] = [];

beforeAll(async () => {
  d = await startDaemon({ source: { kind: 'sim', seed: 51 }, httpPort: 0, token: TOKEN, log: (l) => logs.push(l) });
  await d.firstConnect;
  d.link.on('written', (w) => written.push({ tag: w.tag, line: w.line }));
});
afterAll(async () => {
  await d.close();
});

const clients: TestClient[] = [];
afterEach(async () => {
  for (const c of clients.splice(0)) c.ws.terminate();
  // Leave the bench as the next test expects it: disarmed, no latch, nobody connected.
  await waitFor(() => d.web.size === 0, 5000, 'clients gone');
  // A stop's latch may reach the host only after this starts: clear whatever is there until the bench is safe.
  await waitFor(
    async () => {
      if (d.controller.state === 'tripped') await d.controller.acknowledge().catch(() => {});
      else if (d.sim!.state.armed) await d.controller.disarm().catch(() => {});
      return d.controller.state === 'safe' && !d.sim!.state.armed;
    },
    10_000,
    'bench safe between tests',
    50,
  );
});

async function client(): Promise<TestClient> {
  const c = await TestClient.connect(d.port, TOKEN);
  c.ws.on('error', () => {});
  clients.push(c);
  return c;
}

/** Controller armed at a small throttle, with the checklist confirmed. */
async function armedController(throttle: number): Promise<TestClient> {
  const c = await client();
  expect(c.snapshot!.role).toBe('controller');
  await armFromDashboard(c, throttle);
  await waitFor(() => Math.abs(d.sim!.state.output - throttle) < 1e-9, 5000, 'output at the throttle');
  return c;
}

function replies(c: TestClient): Extract<ServerMessage, { type: 'reply' }>[] {
  return c.messages.filter((m): m is Extract<ServerMessage, { type: 'reply' }> => m.type === 'reply');
}

describe('message floods', () => {
  it('a burst of commands is dropped past the budget, and stop still goes through at once', async () => {
    const c = await armedController(0.2);
    const thrBefore = written.filter((w) => w.tag === 'THR').length;
    // 300 throttle messages in one burst, far over the per-client budget.
    for (let i = 0; i < 300; i++) c.ws.send(JSON.stringify({ type: 'throttle', value: 0.2, id: 10_000 + i }));
    c.ws.send(JSON.stringify({ type: 'stop', id: 99_999 }));
    await c.until(() => replies(c).some((r) => r.id === 99_999), 10_000, 'reply to stop');
    expect(replies(c).find((r) => r.id === 99_999)).toMatchObject({ ok: true });
    await waitFor(() => d.sim!.state.output === 0, 5000, 'output cut');
    expect(d.sim!.state.fault).toBe('estop');
    // Past its budget the flood is dropped unread and unanswered (answering it would double it): a message
    // after the flood, once the budget refills, is answered again.
    await new Promise((r) => setTimeout(r, 1500));
    const answered = replies(c).filter((r) => r.id >= 10_000 && r.id < 10_300);
    expect(answered.length).toBeLessThan(100);
    expect(await c.command({ type: 'ping' })).toEqual({ ok: true });
    // Only the budget's worth of throttle lines reached the device, never the flood.
    expect(written.filter((w) => w.tag === 'THR').length - thrBefore).toBeLessThan(100);
  });

  it('a flood of malformed messages disturbs neither ingest nor stop', async () => {
    const c = await armedController(0.2);
    let ingested = 0;
    const off = d.onSample(() => ingested++);
    try {
      for (let i = 0; i < 2000; i++) c.ws.send(i % 2 ? 'not json {' : JSON.stringify({ type: 'throttle', value: 'lots' }));
      expect(await c.command({ type: 'stop' })).toEqual({ ok: true });
      await waitFor(() => d.sim!.state.output === 0, 5000, 'output cut');
      await waitFor(() => ingested > 200, 10_000, 'ingest goes on');
      expect(d.link.isReady).toBe(true);
    } finally {
      off();
    }
  });
});

describe('hostile payloads', () => {
  it('binary frames are refused and reach nothing', async () => {
    const c = await armedController(0.15);
    const before = written.length;
    c.ws.send(Buffer.from(JSON.stringify({ type: 'throttle', value: 0.5 })), { binary: true });
    await c.until(() => replies(c).some((r) => !r.ok && /binary/.test(r.error)), 5000, 'binary refusal');
    expect(written.slice(before).filter((w) => w.tag === 'THR')).toEqual([]);
    expect(d.sim!.state.output).toBeCloseTo(0.15, 9);
  });

  it('NaN, Infinity and other non-numbers are refused, never clamped; the output stays where it was', async () => {
    const c = await armedController(0.2);
    const before = written.length;
    const texts = [
      '{"type":"throttle","value":NaN}',
      '{"type":"throttle","value":Infinity}',
      '{"type":"throttle","value":-Infinity}',
      '{"type":"throttle","value":1e400}',
      '{"type":"throttle","value":-1e400}',
      '{"type":"throttle","value":"NaN"}',
      '{"type":"throttle","value":"Infinity"}',
      '{"type":"throttle","value":"0.3"}',
      '{"type":"throttle","value":"0x1"}',
      '{"type":"throttle","value":null}',
      '{"type":"throttle","value":true}',
      '{"type":"throttle","value":[0.3]}',
      '{"type":"throttle","value":{"valueOf":0.3}}',
      '{"type":"throttle","value":1.0000001}',
      '{"type":"throttle","value":-0.0001}',
      '{"type":"throttle","value":0.3,"value":2}',
      '{"type":"throttle"}',
      '{"__proto__":{"type":"throttle","value":0.3}}',
      '{"type":"throttle","value":0.3,"constructor":1}',
      '{"type":"throttle","value":0.3,"id":1.5}',
      '{"type":"throttle","value":0.3,"id":"7"}',
    ];
    const base = replies(c).length;
    for (let i = 0; i < texts.length; i++) {
      c.ws.send(texts[i]);
      await c.until(() => replies(c).length >= base + i + 1, 5000, `reply to ${texts[i]}`);
      const r = replies(c)[base + i];
      expect(r.ok, texts[i]).toBe(false);
    }
    // A finite value above the device's ceiling is refused by name, not clamped to the ceiling.
    const above = await c.command({ type: 'throttle', value: 0.95 });
    expect(above.ok).toBe(false);
    expect(above.error).toMatch(/ceiling/);
    expect(written.slice(before).filter((w) => w.tag === 'THR')).toEqual([]);
    expect(d.sim!.state.output).toBeCloseTo(0.2, 9);
    expect(d.sim!.state.commanded).toBeCloseTo(0.2, 9);
  });

  it('a viewer can command nothing but stop', async () => {
    const ctl = await armedController(0.15);
    const v = await client();
    expect(v.snapshot!.role).toBe('viewer');
    const before = written.length;
    const attempts: object[] = [
      { type: 'arm' },
      { type: 'disarm' },
      { type: 'throttle', value: 0.3 },
      { type: 'clear' },
      { type: 'tare' },
      { type: 'checklist', items: [...CHECKLIST_IDS] },
      { type: 'sequence_abort' },
      { type: 'sequence_pause' },
    ];
    for (const a of attempts) {
      const r = await v.command(a as never);
      expect(r.ok, JSON.stringify(a)).toBe(false);
      expect(r.error).toMatch(/viewer/);
    }
    expect(written.slice(before)).toEqual(written.slice(before).filter((w) => w.tag === 'HB' || w.tag === 'STATUS'));
    expect(d.sim!.state.output).toBeCloseTo(0.15, 9);
    // ... and stop, which anyone watching may do.
    expect(await v.command({ type: 'stop' })).toEqual({ ok: true });
    await waitFor(() => d.sim!.state.output === 0, 5000, 'viewer stop cut the output');
    expect(ctl.ws.readyState).toBe(WebSocket.OPEN);
  });
});

/** An upgrade request written byte for byte on a raw socket; resolves with the HTTP status of the answer. */
function rawUpgrade(headers: Record<string, string | undefined>, path = `/ws?token=${TOKEN}`): Promise<number> {
  return new Promise((resolve, reject) => {
    const sock = connect(d.port, '127.0.0.1');
    let buf = '';
    const timer = setTimeout(() => {
      sock.destroy();
      reject(new Error('no answer to the upgrade'));
    }, 5000);
    sock.on('data', (chunk) => {
      buf += chunk.toString('latin1');
      const m = buf.match(/^HTTP\/1\.1 (\d{3})/);
      if (m) {
        clearTimeout(timer);
        sock.destroy();
        resolve(Number(m[1]));
      }
    });
    sock.on('error', () => {});
    const lines = [`GET ${path} HTTP/1.1`];
    for (const [k, v] of Object.entries({ Upgrade: 'websocket', Connection: 'Upgrade', 'Sec-WebSocket-Key': 'cm9idXN0LXRlc3Qta2V5MQ==', 'Sec-WebSocket-Version': '13', ...headers })) {
      if (v !== undefined) lines.push(`${k}: ${v}`);
    }
    sock.write(lines.join('\r\n') + '\r\n\r\n');
  });
}

describe('Host and Origin checks before the handshake (raw requests)', () => {
  it('accepts the canonical names (so the refusals below are not a broken request)', async () => {
    const p = d.port;
    expect(await rawUpgrade({ Host: `127.0.0.1:${p}` })).toBe(101);
    expect(await rawUpgrade({ Host: `localhost:${p}` })).toBe(101);
    expect(await rawUpgrade({ Host: `[::1]:${p}` })).toBe(101);
    expect(await rawUpgrade({ Host: `127.0.0.1:${p}`, Origin: `http://127.0.0.1:${p}` })).toBe(101);
    // Host names are case-insensitive (RFC 9110 common practice) and LOCALHOST is not a name an attacker can
    // point at their own server, so it is accepted as localhost.
    expect(await rawUpgrade({ Host: `LOCALHOST:${p}` })).toBe(101);
    await waitFor(() => d.web.size === 0, 5000, 'raw sockets gone');
  });

  it('refuses odd spellings of our own address in Host with 421', async () => {
    const p = d.port;
    const hosts = [
      `127.0.0.1.:${p}`, // trailing dot
      `localhost.:${p}`,
      `LOCALHOST.:${p}`,
      `2130706433:${p}`, // decimal IPv4
      `0x7f000001:${p}`, // hex IPv4
      `0x7f.0.0.1:${p}`,
      `0177.0.0.1:${p}`, // octal IPv4
      `127.1:${p}`, // short form
      `127.0.0.2:${p}`, // another loopback address: not what the daemon announced
      `[0:0:0:0:0:0:0:1]:${p}`, // IPv6 long form
      `[::ffff:127.0.0.1]:${p}`, // IPv4-mapped IPv6
      `[::1%lo]:${p}`,
      `127.0.0.1`, // no port
      `127.0.0.1:0${p}`, // padded port
      `127.0.0.1:${p + 1}`,
      `localhost.attacker.example:${p}`,
      `attacker.example:${p}`,
      `ATTACKER.EXAMPLE:${p}`,
      `127.0.0.1:${p}@attacker.example`,
      '',
    ];
    for (const h of hosts) expect(await rawUpgrade({ Host: h }), `Host: ${h}`).toBe(421);
    // No Host at all: refused too (Node answers 400 before we see it, or we answer 421).
    expect([400, 421]).toContain(await rawUpgrade({ Host: undefined }));
    expect(d.web.size).toBe(0);
  });

  it('refuses foreign Origins with 403, even with the right token and Host', async () => {
    const p = d.port;
    const origins = [
      'http://attacker.example',
      'null', // sandboxed iframe, file:// page
      `https://127.0.0.1:${p}`,
      `http://127.0.0.1:${p + 1}`,
      `http://127.0.0.1:${p}.attacker.example`,
      `http://127.0.0.1.:${p}`,
      `http://2130706433:${p}`,
      `http://[::ffff:127.0.0.1]:${p}`,
      `http://127.0.0.1:${p}/`,
      `ws://127.0.0.1:${p}`,
      `http://attacker.example/http://127.0.0.1:${p}`,
      '',
    ];
    for (const o of origins) expect(await rawUpgrade({ Host: `127.0.0.1:${p}`, Origin: o }), `Origin: ${o}`).toBe(403);
    expect(d.web.size).toBe(0);
  });

  it('the token never shows in what the in-process daemon logged, nor in any event', async () => {
    const c = await armedController(0.1);
    expect(await c.command({ type: 'stop' })).toEqual({ ok: true });
    await c.until(() => c.messages.some((m) => m.type === 'event' && /emergency stop/.test(m.event.text)), 5000, 'stop event');
    expect(logs.length).toBeGreaterThan(0);
    for (const l of logs) expect(l).not.toContain(TOKEN);
    const texts = c.messages.flatMap((m) => (m.type === 'event' ? [m.event.text] : m.type === 'snapshot' ? m.events.map((e) => e.text) : []));
    expect(texts.length).toBeGreaterThan(0);
    for (const t of texts) expect(t).not.toContain(TOKEN);
  });
});

describe('the token in the output of `ductbench serve` (own process)', () => {
  let sim: SimProcess | null = null;
  let serve: DaemonProcess | null = null;
  afterEach(async () => {
    await serve?.close();
    await sim?.close();
    serve = sim = null;
  });

  it('is printed once, in the dashboard line on stdout, and never on stderr or in events', async () => {
    assertBuilt();
    sim = await SimProcess.start({ seed: 52 });
    const token = 'serve-secret-7d41aa90c3';
    serve = new DaemonProcess(['serve', '--port', sim.devicePath, '--http-port', '0'], { DUCTBENCH_TOKEN: token });
    const m = await serve.stdoutMatch(/dashboard: http:\/\/127\.0\.0\.1:(\d+)\/\?token=(\S+)\n/);
    expect(decodeURIComponent(m[2])).toBe(token);
    const port = Number(m[1]);
    // Things that make the daemon talk: refused upgrades carrying the token, a session, a stop, a trip.
    for (const headers of [{ origin: 'http://attacker.example' }, { host: 'attacker.example' }]) {
      await new Promise<void>((resolve) => {
        const ws = new WebSocket(`ws://127.0.0.1:${port}/ws?token=${token}`, { headers });
        ws.on('unexpected-response', () => (ws.terminate(), resolve()));
        ws.on('error', () => resolve());
      });
    }
    const c = await TestClient.connect(port, token);
    c.ws.on('error', () => {});
    await armFromDashboard(c, 0.2);
    await sim.until((x) => x.output > 0.19, 5000, 'output up');
    expect(await c.command({ type: 'stop' })).toEqual({ ok: true });
    await sim.until((x) => x.output === 0, 5000, 'cut');
    await c.until(() => c.messages.some((x) => x.type === 'event' && /emergency stop/.test(x.event.text)), 5000, 'stop event');
    c.ws.terminate();
    serve.kill('SIGTERM');
    await serve.exited;
    expect(serve.stderr).toMatch(/SIGTERM: cutting throttle/);
    expect(serve.stderr).not.toContain(token);
    expect(serve.stderr).not.toContain(encodeURIComponent(token));
    expect(serve.stdout.split(token).length - 1).toBe(1);
    expect(serve.stdout.split('\n').filter((l) => l.includes(token))).toEqual([expect.stringMatching(/^dashboard: http:\/\/127\.0\.0\.1:\d+\/\?token=/)]);
    for (const x of c.messages) if (x.type === 'event') expect(x.event.text).not.toContain(token);
  });
});
