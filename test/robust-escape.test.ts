// Nothing a client sends may throw out of a handler, and what still escapes (a bug) meets a process-level
// policy. Four parts: every header reader is total (fast-check over arbitrary values); the daemon's upgrade
// and API paths answer hostile header values and request targets with an HTTP status, never a crash or a 500
// (raw sockets, so nothing normalises what is sent); the rate limit judges a message by its parsed type, not
// by the text "stop" inside it; and an exception thrown outside every handler cuts the throttle (STOP on the
// wire, seen by a board in another process), is recorded in the session, and the daemon exits with 70.
// The last part needs dist/ (npm test builds first).

import { mkdtempSync, rmSync } from 'node:fs';
import { connect } from 'node:net';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import fc from 'fast-check';
import { afterAll, afterEach, beforeAll, describe, expect, it } from 'vitest';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { hostAllowed, originAllowed, requestUrl, tokenFromBearer, tokenFromCookie, tokenFromUrl } from '../server/http/access.js';
import { CLIENT_RATE_PER_S } from '../server/http/hub.js';
import { EXIT_INTERNAL } from '../server/util/last-resort.js';
import { CHECKLIST_IDS } from '../server/api/messages.js';
import { assertBuilt, DaemonProcess, runCli, SimProcess } from './helpers/sim-process.js';
import { TestClient } from './helpers/ws-client.js';

const TOKEN = 'escape-test-token-31c9';

/** Pieces a hostile value is made of: broken percent-encoding, separators, brackets, bytes above ASCII. */
const PIECES = ['%', '%2', '%zz', '%E0%A4%A', '%ED%A0%80', '%00', '=', ';', ' ', ',', 'ductbench_token', 'ductbench_token=', '[', ']', ':', '@', '/', '//', '?', '#', '\\', '..', 'é', '\u00ff', '\t', 'a', '0', TOKEN];
const hostile = fc.array(fc.constantFrom(...PIECES), { maxLength: 12 }).map((p) => p.join(''));
/** The same for a request target: no spaces, tabs or bytes above ASCII (the HTTP parser refuses those itself). */
const TARGET_PIECES = PIECES.filter((p) => !/[\s\u0080-\uffff]/.test(p));
const hostileTarget = fc.array(fc.constantFrom(...TARGET_PIECES), { maxLength: 10 }).map((p) => p.join(''));

describe('header readers are total', () => {
  it('never throw, whatever the value (strings, absent, arrays, objects)', () => {
    const hosts = new Set(['127.0.0.1:8470']);
    fc.assert(
      fc.property(fc.oneof(hostile, fc.string({ unit: 'binary' }), fc.anything()), (v) => {
        tokenFromCookie(v);
        tokenFromUrl(v);
        tokenFromBearer(v);
        requestUrl(v);
        expect(typeof hostAllowed(v, hosts)).toBe('boolean');
        expect(typeof originAllowed(v, hosts)).toBe('boolean');
      }),
      { numRuns: 2000 },
    );
  });

  it('a malformed token cookie is no token; a well-formed one is read back exactly', () => {
    for (const bad of ['ductbench_token=%', 'ductbench_token=%zz', 'a=b; ductbench_token=%E0%A4%A', 'ductbench_token=%ED%A0%80']) expect(tokenFromCookie(bad)).toBeNull();
    fc.assert(
      fc.property(fc.string({ unit: 'grapheme', minLength: 1 }), hostile, (token, other) => {
        const cookie = `x=${encodeURIComponent(other)}; ductbench_token=${encodeURIComponent(token)}; y=1`;
        expect(tokenFromCookie(cookie)).toBe(token);
      }),
    );
    // Repeated: the first one counts, as browsers send the most specific first.
    expect(tokenFromCookie('ductbench_token=one; ductbench_token=two')).toBe('one');
  });

  it('request targets that do not parse as URLs are null, not an exception', () => {
    expect(requestUrl('//[')).toBeNull();
    expect(requestUrl('http://')).toBeNull();
    expect(requestUrl('/ws?token=%')?.pathname).toBe('/ws');
  });
});

/** Sends one raw request and resolves with the status of the first response line (0: connection closed without one). */
function rawStatus(port: number, lines: string[]): Promise<number> {
  return new Promise((resolve) => {
    const s = connect(port, '127.0.0.1');
    let buf = '';
    const done = (code: number) => {
      s.destroy();
      resolve(code);
    };
    s.setTimeout(5000, () => done(-1));
    s.on('data', (d: Buffer) => {
      buf += d.toString('latin1');
      const m = buf.match(/^HTTP\/1\.1 (\d{3})/);
      if (m) done(Number(m[1]));
    });
    s.on('error', () => done(0));
    s.on('close', () => done(0));
    s.write(Buffer.from(lines.join('\r\n') + '\r\n\r\n', 'utf8'));
  });
}

describe('the daemon under hostile header values', () => {
  let d: RunningDaemon;
  beforeAll(async () => {
    d = await startDaemon({ source: { kind: 'sim', seed: 83 }, httpPort: 0, token: TOKEN, log: () => {} });
    await d.firstConnect;
  });
  afterAll(async () => {
    await d.close();
  });

  const host = () => `127.0.0.1:${d.port}`;
  const upgrade = (target: string, extra: string[]) => [
    `GET ${target} HTTP/1.1`,
    `Host: ${host()}`,
    'Connection: Upgrade',
    'Upgrade: websocket',
    'Sec-WebSocket-Version: 13',
    'Sec-WebSocket-Key: dGhlIHNhbXBsZSBub25jZQ==',
    ...extra,
  ];
  const api = (target: string, extra: string[]) => [`GET ${target} HTTP/1.1`, `Host: ${host()}`, 'Connection: close', ...extra];

  it('the reported crash: a `%` token cookie on the upgrade and on /api/ is refused with 401', async () => {
    expect(await rawStatus(d.port, upgrade('/ws', ['Cookie: ductbench_token=%']))).toBe(401);
    expect(await rawStatus(d.port, api('/api/status', ['Cookie: ductbench_token=%']))).toBe(401);
    expect(await rawStatus(d.port, upgrade('//[', []))).toBe(400);
    expect(d.link.isReady).toBe(true);
  });

  it('fuzz: Cookie, Host, Origin, Authorization and the target on /ws and /api/ always get a status, never 500', async () => {
    const seen = new Map<number, number>();
    await fc.assert(
      fc.asyncProperty(
        fc.constantFrom('ws', 'api'),
        fc.constantFrom('/ws', '/api/status', '/api/sessions/', '/api/sessions/1/export', '/'),
        hostileTarget,
        fc.record({ cookie: fc.option(hostile), host: fc.option(hostile), origin: fc.option(hostile), authorization: fc.option(hostile) }),
        async (kind, base, tail, h) => {
          const extra: string[] = [];
          if (h.cookie !== null) extra.push(`Cookie: ${h.cookie}`);
          if (h.origin !== null) extra.push(`Origin: ${h.origin}`);
          if (h.authorization !== null) extra.push(`Authorization: ${h.authorization}`);
          const lines = kind === 'ws' ? upgrade(base + tail, extra) : api(base + tail, extra);
          // A hostile Host replaces the good one (the daemon must refuse it, or the parser the request).
          if (h.host !== null) lines[1] = `Host: ${h.host}`;
          const status = await rawStatus(d.port, lines);
          seen.set(status, (seen.get(status) ?? 0) + 1);
          expect(status, lines.join(' | ')).toBeGreaterThanOrEqual(100);
          expect(status, lines.join(' | ')).not.toBe(500);
        },
      ),
      { numRuns: 300 },
    );
    // The generator reaches past the first check (a refusal by token, not only by Host).
    expect(seen.get(401) ?? 0).toBeGreaterThan(0);
    expect(seen.get(421) ?? 0).toBeGreaterThan(0);
    // Still serving, still on the bench.
    expect(await rawStatus(d.port, api(`/api/status?token=${TOKEN}`, []))).toBe(200);
    expect(d.link.isReady).toBe(true);
  });

  it('rate limit by parsed type: a flood of pings carrying the text "stop" is limited like any ping; a real stop is not', async () => {
    const c = await TestClient.connect(d.port, TOKEN);
    c.ws.on('error', () => {});
    try {
      const replies = () => c.messages.filter((m): m is Extract<typeof m, { type: 'reply' }> => m.type === 'reply');
      for (let i = 0; i < 400; i++) c.ws.send(JSON.stringify({ type: 'ping', x: 'stop', id: 20_000 + i }));
      c.ws.send(JSON.stringify({ type: 'stop', id: 99_001 }));
      await c.until(() => replies().some((r) => r.id === 99_001), 10_000, 'reply to the real stop');
      expect(replies().find((r) => r.id === 99_001)).toMatchObject({ ok: true });
      // The flood: within the budget the pings are refused for their unknown field; past it, unanswered.
      const answered = replies().filter((r) => r.id >= 20_000 && r.id < 20_400);
      expect(answered.length).toBeLessThan(CLIENT_RATE_PER_S * 3);
      expect(answered.length).toBeGreaterThan(0);
    } finally {
      c.ws.terminate();
    }
  });
});

describe('an exception that escapes every handler (daemon and board in processes of their own)', () => {
  const cleanups: (() => Promise<void> | void)[] = [];
  afterEach(async () => {
    for (const c of cleanups.splice(0).reverse()) await c();
  });

  it('cuts the throttle with STOP, records the cause in the session, and exits with 70', async () => {
    assertBuilt();
    const dir = mkdtempSync(join(tmpdir(), 'ductbench-escape-'));
    cleanups.push(() => rmSync(dir, { recursive: true, force: true }));
    const sim = await SimProcess.start({ seed: 84, link: join(dir, 'tty') });
    cleanups.push(() => sim.close());
    const serve = new DaemonProcess(['serve', '--port', sim.devicePath, '--http-port', '0', '--data-dir', dir], { DUCTBENCH_TOKEN: TOKEN, DUCTBENCH_INJECT_ESCAPE: 'running' });
    cleanups.push(() => serve.close());
    const m = await serve.stdoutMatch(/dashboard: http:\/\/127\.0\.0\.1:(\d+)\//);
    const c = await TestClient.connect(Number(m[1]), TOKEN);
    c.ws.on('error', () => {});
    cleanups.push(() => c.ws.terminate());
    expect(await c.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).toEqual({ ok: true });
    expect(await c.command({ type: 'arm' })).toEqual({ ok: true });
    // The throttle ramps up (slew limit); the escape comes 300 ms into it, so the reply is not waited for.
    c.ws.send(JSON.stringify({ type: 'throttle', value: 0.25, id: 5 }));
    const exit = await serve.exited;
    expect(exit.code, serve.stderr).toBe(EXIT_INTERNAL);
    expect(serve.stderr).toMatch(/internal error \(uncaught exception\).*injected escape.*throttle cut/);
    // The board latched on the host's STOP, not on its own heartbeat time-out: the cut came first.
    const s = await sim.until((x) => x.mode === 'latched', 10_000, 'latched');
    expect(s.output).toBe(0);
    expect(s.fault).toBe('estop');
    const tos = (await sim.transitions()).map((t) => t.to);
    expect(tos.slice(tos.lastIndexOf('armed'))).toEqual(['armed', 'latched']);
    const listed = await runCli(['sessions', 'list', '--data-dir', dir, '--json']);
    expect(listed.code, listed.stderr).toBe(0);
    const sessions = JSON.parse(listed.stdout) as { id: number; outcome: string }[];
    expect(sessions[0].outcome).toBe('aborted');
    const shown = await runCli(['sessions', 'show', String(sessions[0].id), '--data-dir', dir, '--json']);
    expect(shown.code, shown.stderr).toBe(0);
    expect(shown.stdout).toMatch(/internal_error/);
    expect(shown.stdout).toMatch(/injected escape/);
  });
});
