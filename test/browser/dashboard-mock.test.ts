// The built dashboard in headless chromium against a small mock daemon that speaks server/api/messages.ts:
// a snapshot on every connect, then sample batches every 50 ms with a moving thrust. Checks that the charts
// and readouts really update, that the stop button, Space and Escape each send {type:'stop'}, that a viewer
// gets disabled controls, how a bad token is reported, and that a dropped socket is re-synced.
// The bench in the mock is invented (a 10-inch propeller on a 4-cell pack, "Quorrel test cell").

import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import { mkdir, readFile, rm } from 'node:fs/promises';
import { extname, join, normalize } from 'node:path';
import type { AddressInfo, Socket } from 'node:net';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { WebSocketServer, type WebSocket } from 'ws';
import type { Browser } from 'playwright-core';
import {
  API_VERSION,
  emptyBatch,
  parseClientMessage,
  type BenchView,
  type ClientMessage,
  type LinkView,
  type Role,
  type SampleBatch,
  type ServerMessage,
  type Snapshot,
} from '../../server/api/messages.js';
import { ARTIFACTS_DIR, WAIT_MS, buildDashboard, eventually, launchBrowser, openDashboard, waitForConnection } from './harness.js';

const TOKEN = 'mock-token-3f9a';
const GF = 9.80665e-3;

// ---------------------------------------------------------------- mock daemon

interface MockClient {
  ws: WebSocket;
  role: Role;
  received: ClientMessage[];
}

class MockDaemon {
  server!: Server;
  wss = new WebSocketServer({ noServer: true });
  clients: MockClient[] = [];
  /** Every client message from every connection, in arrival order. */
  received: { role: Role; msg: ClientMessage }[] = [];
  connections = 0;
  nextRole: Role = 'controller';
  /** Holds the snapshot back, so the page builds its charts with no data first. */
  snapshotDelayMs = 0;
  benchState: BenchView['state'] = 'armed';
  private timer: ReturnType<typeof setInterval> | null = null;
  private t0 = Date.now();
  private throttle = 0.3;
  private sockets = new Set<Socket>();

  constructor(private readonly webDir: string) {}

  async start(): Promise<string> {
    this.server = createServer((req, res) => void this.serveFile(req, res));
    this.server.on('connection', (s) => {
      this.sockets.add(s);
      s.on('close', () => this.sockets.delete(s));
    });
    this.server.on('upgrade', (req, socket, head) => {
      const url = new URL(req.url ?? '/', 'http://x');
      if (url.pathname !== '/ws' || url.searchParams.get('token') !== TOKEN) {
        // As the real daemon does: refuse a bad token before the upgrade.
        socket.end('HTTP/1.1 401 Unauthorized\r\nConnection: close\r\nContent-Length: 0\r\n\r\n');
        return;
      }
      this.wss.handleUpgrade(req, socket, head, (ws) => this.accept(ws));
    });
    await new Promise<void>((r) => this.server.listen(0, '127.0.0.1', r));
    this.timer = setInterval(() => this.tick(), 50);
    return `http://127.0.0.1:${(this.server.address() as AddressInfo).port}`;
  }

  async stop(): Promise<void> {
    if (this.timer) clearInterval(this.timer);
    for (const c of this.clients) c.ws.terminate();
    this.wss.close();
    for (const s of this.sockets) s.destroy();
    await new Promise<void>((r) => this.server.close(() => r()));
  }

  private async serveFile(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const path = new URL(req.url ?? '/', 'http://x').pathname;
    const rel = normalize(path === '/' ? '/index.html' : path).replace(/^(\.\.[/\\])+/, '');
    const types: Record<string, string> = { '.html': 'text/html', '.js': 'text/javascript', '.css': 'text/css' };
    try {
      const body = await readFile(join(this.webDir, rel));
      res.writeHead(200, {
        'content-type': types[extname(rel)] ?? 'application/octet-stream',
        // The daemon's policy (server/http/server.ts): the page must work under it, with nothing fetched elsewhere.
        'content-security-policy': "default-src 'self'; connect-src 'self'; img-src 'self' data: blob:; style-src 'self' 'unsafe-inline'; frame-ancestors 'none'",
      });
      res.end(body);
    } catch {
      res.writeHead(404).end();
    }
  }

  bench(): BenchView {
    return {
      state: this.benchState,
      reason: this.benchState === 'armed' ? 'armed by the operator' : 'stopped by the operator',
      since: this.t0,
      armed: this.benchState === 'armed' || this.benchState === 'running',
      throttleCommand: this.benchState === 'safe' ? 0 : this.throttle,
      throttleOutput: this.benchState === 'safe' ? 0 : this.throttle,
      fault: 'none',
      ceiling: 0.8,
    };
  }

  private link(): LinkView {
    return {
      status: 'ready',
      source: 'virtual bench (mock)',
      linesOk: 12345,
      linesBad: { checksum: 2, too_long: 0 },
      seqGaps: 1,
      writeDropped: 0,
      reconnects: 0,
      retryInMs: null,
      error: null,
    };
  }

  /** An invented propeller: thrust swings between 1 and 5 N, thrust per watt about 30 % of the ideal. */
  private samples(from: number, count: number, stepMs: number): SampleBatch {
    const b = emptyBatch();
    for (let i = 0; i < count; i++) {
      const t = from + i * stepMs;
      const s = (t - this.t0) / 1000;
      const thrust = 3 + 2 * Math.sin(s * 1.3);
      // 35.93/sqrt(T) gf/W is the ideal open rotor (momentum theory, D 0.254 m, rho 1.225 kg/m^3); the mock
      // runs a little below a model at 30 % of it, with a wobble, so points and curve are told apart.
      const gpw = ((0.28 + 0.01 * Math.sin(s * 23)) * 35.93) / Math.sqrt(thrust);
      const power = thrust / GF / gpw;
      const voltage = 16.4 - power / 400;
      b.t.push(t);
      b.dt.push(s);
      b.thrust.push(thrust);
      b.voltage.push(voltage);
      b.current.push(power / voltage);
      b.power.push(power);
      // rpm at a fifth of the rate (null in between), as a slower sensor would report it.
      b.rpm.push(i % 5 === 0 ? 5200 * Math.sqrt(thrust / 3) : null);
      b.temp.push(31.5);
      b.torque.push(null);
      b.out.push(this.throttle);
    }
    return b;
  }

  private prediction() {
    const thrust_N = Array.from({ length: 23 }, (_, i) => 0.5 + i * 0.25);
    const ideal = thrust_N.map((t) => 35.93 / Math.sqrt(t));
    return {
      thrust_N,
      grams_per_watt: ideal.map((g) => 0.3 * g),
      ideal_open_gpw: ideal,
      ideal_ducted_gpw: ideal.map((g, i) => (i < 2 ? null : g * Math.SQRT2)),
    };
  }

  private accept(ws: WebSocket): void {
    const client: MockClient = { ws, role: this.nextRole, received: [] };
    this.clients.push(client);
    this.connections++;
    const now = Date.now();
    const snapshot: Snapshot = {
      type: 'snapshot',
      api: API_VERSION,
      role: client.role,
      bench: this.bench(),
      link: this.link(),
      identity: {
        protocol: 1,
        firmware: 'quorrel-cell',
        firmwareVersion: '0.4.2',
        channels: { thrust: 200, voltage: 200, current: 200, rpm: 40, temp: 2 },
        throttleCeiling: 0.8,
        heartbeatTimeoutMs: 300,
        escRateHz: 50,
      },
      history: this.samples(now - 5000, 500, 10),
      events: [{ t: now - 4000, level: 'info', kind: 'state', text: 'bench armed' }],
      // The mock stands for a daemon whose pre-arm checklist was already confirmed (the real gate: dashboard-daemon.test.ts).
      extras: { prediction: this.prediction(), checklist: { confirmed: true, at: Date.now(), items: [] } },
    };
    if (this.snapshotDelayMs > 0) {
      // Nothing else may reach the page before its snapshot: keep it out of the broadcast list meanwhile.
      this.clients = this.clients.filter((c) => c !== client);
      setTimeout(() => {
        if (ws.readyState !== ws.OPEN) return;
        ws.send(JSON.stringify({ ...snapshot, history: this.samples(Date.now() - 5000, 500, 10) }));
        this.clients.push(client);
      }, this.snapshotDelayMs);
    } else {
      ws.send(JSON.stringify(snapshot));
    }
    ws.on('message', (data) => {
      const parsed = parseClientMessage(String(data));
      if (!parsed.ok) {
        ws.send(JSON.stringify({ type: 'reply', id: -1, ok: false, error: parsed.error }));
        return;
      }
      const msg = parsed.value;
      client.received.push(msg);
      this.received.push({ role: client.role, msg });
      if (msg.type === 'stop') {
        this.benchState = 'safe';
        this.throttle = 0;
        this.broadcast({ type: 'bench', bench: this.bench() });
      }
      if (msg.type === 'throttle') this.throttle = msg.value;
      if (msg.type === 'arm') this.benchState = 'armed';
      const allowed = msg.type === 'stop' || msg.type === 'ping' || client.role === 'controller';
      const reply: ServerMessage = allowed ? { type: 'reply', id: msg.id ?? 0, ok: true } : { type: 'reply', id: msg.id ?? 0, ok: false, error: 'viewer' };
      ws.send(JSON.stringify(reply));
    });
    ws.on('close', () => {
      this.clients = this.clients.filter((c) => c !== client);
    });
  }

  private lastT = Date.now();
  private tick(): void {
    const now = Date.now();
    const n = Math.max(1, Math.round((now - this.lastT) / 10));
    const batch = this.samples(this.lastT + 10, n, 10);
    this.lastT += n * 10;
    this.broadcast({ type: 'samples', batch });
  }

  broadcast(m: ServerMessage): void {
    const text = JSON.stringify(m);
    for (const c of this.clients) if (c.ws.readyState === c.ws.OPEN) c.ws.send(text);
  }

  stopsSince(index: number): number {
    return this.received.slice(index).filter((r) => r.msg.type === 'stop').length;
  }

  setBench(state: BenchView['state']): void {
    this.benchState = state;
    if (state === 'armed' && this.throttle === 0) this.throttle = 0.3;
    this.broadcast({ type: 'bench', bench: this.bench() });
  }

  dropAll(): void {
    for (const c of this.clients) c.ws.terminate();
  }
}

// ---------------------------------------------------------------- tests

let daemon: MockDaemon;
let base: string;
let browser: Browser;
let webDir: string;

beforeAll(async () => {
  webDir = await buildDashboard();
  daemon = new MockDaemon(webDir);
  base = await daemon.start();
  browser = await launchBrowser();
  await mkdir(ARTIFACTS_DIR, { recursive: true });
}, 180_000);

afterAll(async () => {
  await browser?.close();
  await daemon?.stop();
  if (webDir) await rm(webDir, { recursive: true, force: true });
}, 60_000);

/** Pixels with any paint on a chart's canvas: a blank canvas has none (uPlot draws axes even without data). */
const painted = (page: import('playwright-core').Page, selector: string) =>
  page.locator(`${selector} canvas`).evaluate((c) => {
    const canvas = c as HTMLCanvasElement;
    const d = canvas.getContext('2d')!.getImageData(0, 0, canvas.width, canvas.height).data;
    let n = 0;
    for (let i = 3; i < d.length; i += 4) if (d[i] > 0) n++;
    return n;
  });

const chartState = (page: import('playwright-core').Page, channel: string) =>
  page.locator(`db-live-chart[channel="${channel}"]`).evaluate((el) => ({
    draws: Number(el.getAttribute('data-draws') ?? 0),
    points: Number(el.getAttribute('data-points') ?? 0),
    last: el.getAttribute('data-last'),
  }));

describe('dashboard against a mock daemon', () => {
  it('connects with the token, hides it from the URL, and keeps charts and readouts moving', async () => {
    daemon.nextRole = 'controller';
    daemon.setBench('armed');
    const { page, context, errors } = await openDashboard(browser, `${base}/?token=${TOKEN}`);
    try {
      expect(new URL(page.url()).searchParams.has('token')).toBe(false);
      expect(await page.evaluate(() => sessionStorage.getItem('ductbench.token'))).toBe(TOKEN);

      // The chart is redrawn with new data: its draw counter climbs and the newest value changes.
      const first = await eventually(() => chartState(page, 'thrust'), (s) => s.draws > 0 && s.points > 0, 'a first thrust chart draw');
      const later = await eventually(
        () => chartState(page, 'thrust'),
        (s) => s.draws >= first.draws + 3 && s.last !== first.last,
        'the thrust chart to redraw with new data',
      );
      expect(later.points).toBeGreaterThan(10);
      // Decimated to the pixel width: never more than two points per pixel column (plus gap markers).
      const width = await page.locator('db-live-chart[channel="thrust"] .plot').evaluate((el) => el.clientWidth);
      expect(later.points).toBeLessThanOrEqual(2 * width + 4);

      // The slower rpm channel (null on four rows of five) still draws a line, not nothing.
      const rpm = await eventually(() => chartState(page, 'rpm'), (s) => s.points > 10, 'rpm points');
      expect(Number(rpm.last)).toBeGreaterThan(1000);

      // The rendered canvas itself changes.
      const canvas = page.locator('db-live-chart[channel="thrust"] canvas');
      const img1 = await canvas.evaluate((c) => (c as HTMLCanvasElement).toDataURL());
      await eventually(() => canvas.evaluate((c) => (c as HTMLCanvasElement).toDataURL()), (img) => img !== img1, 'the thrust canvas to change');

      // Readout text changes over time.
      const readout = page.getByTestId('readout-thrust');
      const text1 = await readout.textContent();
      expect(text1).toMatch(/^\d+\.\d{3}$/);
      await expect(readout.getAttribute('data-unit')).resolves.toBe('N');
      await eventually(() => readout.textContent(), (t) => t !== text1, 'the thrust readout to change');

      // The efficiency scatter gets points, and the model overlay is drawn from extras.prediction.
      await eventually(() => page.locator('db-efficiency-chart').getAttribute('data-points'), (p) => Number(p) > 5, 'efficiency points');
      await expect(page.locator('db-efficiency-chart .head').textContent()).resolves.not.toContain('no model overlay');

      // Switching to gram-force converts the readout (1 gf = 9.80665e-3 N) and is remembered.
      await page.getByTestId('unit-gf').click();
      await eventually(() => readout.getAttribute('data-unit'), (u) => u === 'gf', 'the readout in gf');
      const gfText = (await readout.textContent()) ?? '';
      expect(gfText).toMatch(/^\d+\.\d$/);
      const gf = Number(gfText);
      expect(gf).toBeGreaterThan(0.9 / GF); // the mock's thrust stays between 1 and 5 N
      expect(gf).toBeLessThan(5.1 / GF);
      expect(await page.evaluate(() => localStorage.getItem('ductbench.prefs.v1'))).toContain('"gf"');
      await eventually(() => chartState(page, 'thrust'), (s) => Number(s.last) > 90, 'the thrust chart in gf');

      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-mock.png'), fullPage: true });
      expect(errors).toEqual([]);
    } finally {
      await context.close();
    }
  }, 120_000);

  it('sends stop from the button, from Space and from Escape, and Space never clicks a focused button', async () => {
    daemon.nextRole = 'controller';
    daemon.setBench('armed');
    const { page, context, errors } = await openDashboard(browser, `${base}/?token=${TOKEN}`);
    try {
      let mark = daemon.received.length;
      await page.getByTestId('stop').click();
      await eventually(async () => daemon.stopsSince(mark), (n) => n === 1, 'a stop from the button');
      await eventually(() => page.locator('db-stop-button .status').textContent(), (t) => /stop confirmed/.test(t ?? ''), 'stop confirmed');

      // Scroll to the bottom: the stop button is fixed and still on screen.
      await page.evaluate(() => window.scrollTo(0, document.body.scrollHeight));
      await expect(page.getByTestId('stop').isVisible()).resolves.toBe(true);
      const box = await page.getByTestId('stop').boundingBox();
      expect(box && box.y + box.height <= 1000 && box.y >= 0).toBe(true);

      mark = daemon.received.length;
      await page.locator('body').press('Space');
      await eventually(async () => daemon.stopsSince(mark), (n) => n === 1, 'a stop from Space');

      mark = daemon.received.length;
      await page.keyboard.press('Escape');
      await eventually(async () => daemon.stopsSince(mark), (n) => n === 1, 'a stop from Escape');

      // The stop put the mock bench in 'safe', so Arm is enabled: focus it and press Space. That must stop,
      // not arm.
      await eventually(() => page.getByTestId('arm').isEnabled(), (e) => e, 'Arm enabled once safe');
      await page.getByTestId('arm').focus();
      mark = daemon.received.length;
      await page.keyboard.press('Space');
      await eventually(async () => daemon.stopsSince(mark), (n) => n === 1, 'a stop from Space on the focused Arm button');
      expect(daemon.received.slice(mark).map((r) => r.msg.type)).not.toContain('arm');

      // Arm for real (click), then the throttle number sends on Enter as a fraction; Escape and Space inside
      // the number input still stop.
      await page.getByTestId('arm').click();
      await eventually(async () => daemon.received.slice(mark).some((r) => r.msg.type === 'arm'), (v) => v, 'arm sent');
      daemon.setBench('armed');
      const number = page.getByTestId('throttle-number');
      await eventually(() => number.isEnabled(), (e) => e, 'the throttle input enabled when armed');
      mark = daemon.received.length;
      await number.fill('25');
      // Typing alone sends nothing.
      expect(daemon.received.slice(mark).filter((r) => r.msg.type === 'throttle')).toEqual([]);
      await number.press('Enter');
      const throttle = await eventually(
        async () => daemon.received.slice(mark).find((r) => r.msg.type === 'throttle')?.msg,
        (m) => m !== undefined,
        'a throttle command',
      );
      expect(throttle).toMatchObject({ type: 'throttle', value: 0.25 });
      expect(typeof throttle?.id).toBe('number');

      // Dragging the slider sends one command, on release, not one per pixel.
      const slider = page.getByTestId('throttle-slider');
      const sb = (await slider.boundingBox())!;
      mark = daemon.received.length;
      await page.mouse.move(sb.x + 4, sb.y + sb.height / 2);
      await page.mouse.down();
      for (let i = 1; i <= 12; i++) await page.mouse.move(sb.x + 4 + (i * (sb.width - 8) * 0.5) / 12, sb.y + sb.height / 2);
      expect(daemon.received.slice(mark).filter((r) => r.msg.type === 'throttle')).toEqual([]);
      await page.mouse.up();
      const dragged = await eventually(
        async () => daemon.received.slice(mark).filter((r) => r.msg.type === 'throttle'),
        (l) => l.length >= 1,
        'a throttle command on release',
      );
      expect(dragged.length).toBe(1);
      const v = (dragged[0].msg as { value: number }).value;
      expect(v).toBeGreaterThan(0.2); // about half of the 0..80 % track
      expect(v).toBeLessThanOrEqual(0.8);

      // Above the device's 80 % ceiling: refused on the page, not sent, not clamped.
      mark = daemon.received.length;
      await number.fill('95');
      await number.press('Enter');
      await expect(page.locator('db-throttle-control .error').textContent()).resolves.toMatch(/ceiling/);

      // (mark is kept: the stop below arrives after anything the 95 might have sent, as one socket keeps order.)
      await number.focus();
      await page.keyboard.press('Escape');
      await eventually(async () => daemon.stopsSince(mark), (n) => n === 1, 'a stop from Escape inside the number input');
      expect(daemon.received.slice(mark).filter((r) => r.msg.type === 'throttle')).toEqual([]);

      // Space inside the number input stops too (a number has no spaces; see web/src/keys.ts).
      daemon.setBench('armed');
      await eventually(() => number.isEnabled(), (e) => e, 'the throttle input enabled again');
      mark = daemon.received.length;
      await number.focus();
      expect(await number.evaluate((el) => el.matches(':focus'))).toBe(true);
      await page.keyboard.press('Space');
      await eventually(async () => daemon.stopsSince(mark), (n) => n === 1, 'a stop from Space inside the number input');
      expect(errors).toEqual([]);
    } finally {
      await context.close();
    }
  }, 120_000);

  it('disables the controls for a viewer, who can still stop', async () => {
    daemon.nextRole = 'viewer';
    daemon.setBench('armed');
    const { page, context, errors } = await openDashboard(browser, `${base}/?token=${TOKEN}`);
    try {
      await expect(page.getByTestId('viewer-note').isVisible()).resolves.toBe(true);
      for (const id of ['arm', 'disarm', 'tare', 'clear', 'throttle-slider', 'throttle-number', 'throttle-set']) {
        await expect(page.getByTestId(id).isDisabled(), id).resolves.toBe(true);
      }
      const mark = daemon.received.length;
      await page.getByTestId('stop').click();
      await eventually(async () => daemon.received.slice(mark).filter((r) => r.msg.type === 'stop' && r.role === 'viewer').length, (n) => n === 1, 'a viewer stop');
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-mock-viewer.png'), fullPage: false });
      expect(errors).toEqual([]);
    } finally {
      await context.close();
      daemon.nextRole = 'controller';
    }
  }, 120_000);

  it('keeps the stop button and the caution in view on a phone-sized window at any scroll position', async () => {
    daemon.nextRole = 'controller';
    const { page, context, errors } = await openDashboard(browser, `${base}/?token=${TOKEN}`, { viewport: { width: 390, height: 800 } });
    try {
      const inView = async (sel: string) => {
        const box = await page.locator(sel).first().boundingBox();
        return box !== null && box.y >= 0 && box.y + box.height <= 800 && box.x >= 0 && box.x + box.width <= 390;
      };
      const height = await page.evaluate(() => document.documentElement.scrollHeight);
      expect(height).toBeGreaterThan(1600); // the panels stack in one column: there is something to scroll
      for (const y of [0, height / 2, height]) {
        await page.evaluate((to) => window.scrollTo(0, to), y);
        await eventually(() => inView('[data-testid="stop"]'), (v) => v, `stop button in view at scroll ${y}`);
        await eventually(() => inView('db-caution-banner'), (v) => v, `caution banner in view at scroll ${y}`);
      }
      await page.evaluate((to) => window.scrollTo(0, to), height / 3);
      await page.screenshot({ path: join(ARTIFACTS_DIR, 'dashboard-mock-narrow.png') });
      expect(errors).toEqual([]);
    } finally {
      await context.close();
    }
  }, 120_000);

  it('paints charts that were built before the snapshot arrived', async () => {
    daemon.nextRole = 'controller';
    daemon.setBench('armed');
    daemon.snapshotDelayMs = 1500;
    try {
      const { page, context, errors } = await openDashboard(browser, `${base}/?token=${TOKEN}`, { waitFor: 'app' });
      try {
        // The charts exist (and are sized) while the page still waits for its snapshot.
        await waitForConnection(page, 'syncing');
        await eventually(() => page.locator('db-efficiency-chart canvas').count(), (n) => n === 1, 'the scatter built before the snapshot');
        await waitForConnection(page, 'live');
        await eventually(() => page.locator('db-efficiency-chart').getAttribute('data-points'), (p) => Number(p) > 5, 'efficiency points');
        // Dots and lines take thousands of pixels; axes alone a few hundred; a blank canvas none.
        await eventually(() => painted(page, 'db-efficiency-chart'), (n) => n > 5000, 'the scatter painted');
        await eventually(() => painted(page, 'db-live-chart[channel="thrust"]'), (n) => n > 1000, 'the thrust chart painted');
        expect(errors).toEqual([]);
      } finally {
        await context.close();
      }
    } finally {
      daemon.snapshotDelayMs = 0;
    }
  }, 120_000);

  it('re-syncs from a fresh snapshot after the socket drops', async () => {
    daemon.nextRole = 'controller';
    const { page, context, errors } = await openDashboard(browser, `${base}/?token=${TOKEN}`);
    try {
      const before = daemon.connections;
      daemon.dropAll();
      await eventually(async () => daemon.connections, (n) => n > before, 'a reconnect', WAIT_MS);
      await waitForConnection(page, 'live');
      // The token survived in sessionStorage: a reload still connects although the URL no longer has it.
      await page.reload();
      await waitForConnection(page, 'live');
      expect(errors).toEqual([]);
    } finally {
      await context.close();
    }
  }, 120_000);

  it('tells the user when the token is refused', async () => {
    const { page, context } = await openDashboard(browser, `${base}/?token=wrong`, { waitFor: 'app' });
    try {
      const alert = page.getByTestId('connection-alert');
      await eventually(() => alert.textContent().catch(() => ''), (t) => /could not connect: check the token in the URL/.test(t ?? ''), 'the token alert');
    } finally {
      await context.close();
    }
  }, 60_000);
});
