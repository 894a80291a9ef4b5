// The built dashboard (dist/web) in Debian's headless Chromium, fed by a small mock daemon that speaks
// server/api/messages.ts: a snapshot, then one hour of 1 kHz telemetry (3.6 million rows a channel, host times
// ending now) pushed as a burst of 5000-row batches as fast as the page takes them, then live 1 kHz data in
// 50 ms batches while frames are measured. The dashboard's ring keeps its real configuration (600,000 rows, ten
// minutes at 1 kHz): the hour goes through it, the last ten minutes stay, and the live charts decimate their
// window (60 s by default, then the longest offered, 300 s) to the plot width before drawing.
//
// Per frame, inside the page: the work from the first requestAnimationFrame callback of a frame (the charts
// draw in theirs) to a message posted from it, which runs once the frame's style, layout and paint are done.
// Also the intervals between frames, long tasks (message handling outside frames) and the JS heap.

import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import { existsSync } from 'node:fs';
import { readFile } from 'node:fs/promises';
import type { AddressInfo } from 'node:net';
import { extname, join, normalize, resolve } from 'node:path';
import { chromium } from 'playwright-core';
import { WebSocketServer, type WebSocket } from 'ws';
import { API_VERSION, emptyBatch, type BenchView, type LinkView, type Snapshot } from '../server/api/messages.js';
import { BENCH_DIR, spread, type Spread } from './common.js';

export interface DashboardBench {
  rows_pushed: number;
  ring_capacity_rows: number;
  ring_rows_held: number;
  hour_ingest_s: number;
  /** Per-frame main-thread work, frames in which the page drew, per window. */
  frame_work_60s: Spread;
  frame_work_300s: Spread;
  /** Intervals between animation frames (vsync ~16.7 ms; longer means a frame was missed). */
  frame_interval_60s: Spread;
  frame_interval_300s: Spread;
  long_tasks: number;
  longest_task_ms: number;
  js_heap_used_mb: number;
  js_heap_total_mb: number;
  points_drawn_per_chart: number | null;
  /**
   * Redraws a second of each chart while frames were measured ("efficiency" and the live channels), per window:
   * fewer, cheaper frames must not come from charts that stopped updating.
   */
  chart_redraws_per_s_60s: Record<string, number>;
  chart_redraws_per_s_300s: Record<string, number>;
  /** Points each chart last handed to uPlot (data-points), 300 s window. */
  chart_points: Record<string, number>;
}

const HOUR_ROWS = 3_600_000;
const BURST_ROWS = 5000;
const TOKEN = 'bench-token-7c21';
const CHROMIUM = process.env.DUCTBENCH_CHROMIUM ?? '/usr/bin/chromium';

export function chromiumAvailable(): boolean {
  return existsSync(CHROMIUM);
}

/** Columnar batch as JSON text, written by hand: 3.6 million rows through JSON.stringify would dominate the run. */
function batchJson(t0: number, i0: number, n: number): string {
  const t: string[] = [];
  const dt: string[] = [];
  const thrust: string[] = [];
  const voltage: string[] = [];
  const current: string[] = [];
  const power: string[] = [];
  const rpm: string[] = [];
  const out: string[] = [];
  for (let k = 0; k < n; k++) {
    const i = i0 + k;
    const s = i / 1000;
    const th = 3 + 2 * Math.sin(s * 0.9) + 0.05 * Math.sin(i * 0.7);
    const v = 16.4 - 0.00006 * s;
    const p = 18 * th;
    t.push(String(t0 + i));
    dt.push(s.toFixed(3));
    thrust.push(th.toFixed(4));
    voltage.push(v.toFixed(3));
    current.push((p / v).toFixed(3));
    power.push(p.toFixed(2));
    rpm.push(i % 5 === 0 ? String(Math.round(5200 * Math.sqrt(th / 3))) : 'null');
    out.push('0.420');
  }
  const nulls = new Array<string>(n).fill('null').join(',');
  return `{"type":"samples","batch":{"t":[${t}],"dt":[${dt}],"thrust":[${thrust}],"voltage":[${voltage}],"current":[${current}],"power":[${power}],"rpm":[${rpm}],"temp":[${nulls}],"torque":[${nulls}],"out":[${out}]}}`;
}

const bench: BenchView = { state: 'running', reason: 'benchmark', since: Date.now(), armed: true, throttleCommand: 0.42, throttleOutput: 0.42, fault: 'none', ceiling: 0.9 };
const link: LinkView = { status: 'ready', source: 'benchmark mock', linesOk: 0, linesBad: {}, seqGaps: 0, writeDropped: 0, reconnects: 0, retryInMs: null, error: null };

class MockDaemon {
  private server!: Server;
  private readonly wss = new WebSocketServer({ noServer: true });
  socket: WebSocket | null = null;
  private connected!: () => void;
  readonly connectedP = new Promise<void>((r) => (this.connected = r));

  constructor(private readonly webDir: string) {}

  async start(): Promise<string> {
    this.server = createServer((req, res) => void this.serveFile(req, res));
    this.server.on('upgrade', (req, socket, head) => this.wss.handleUpgrade(req, socket, head, (ws) => this.accept(ws)));
    await new Promise<void>((r) => this.server.listen(0, '127.0.0.1', r));
    return `http://127.0.0.1:${(this.server.address() as AddressInfo).port}/?token=${TOKEN}`;
  }

  async stop(): Promise<void> {
    this.socket?.terminate();
    this.wss.close();
    this.server.closeAllConnections();
    await new Promise<void>((r) => this.server.close(() => r()));
  }

  private async serveFile(req: IncomingMessage, res: ServerResponse): Promise<void> {
    const path = new URL(req.url ?? '/', 'http://x').pathname;
    const rel = normalize(path === '/' ? '/index.html' : path).replace(/^(\.\.[/\\])+/, '');
    const types: Record<string, string> = { '.html': 'text/html', '.js': 'text/javascript', '.css': 'text/css' };
    try {
      const body = await readFile(join(this.webDir, rel));
      res.writeHead(200, { 'content-type': types[extname(rel)] ?? 'application/octet-stream' });
      res.end(body);
    } catch {
      res.writeHead(404).end();
    }
  }

  private accept(ws: WebSocket): void {
    this.socket = ws;
    const snapshot: Snapshot = {
      type: 'snapshot',
      api: API_VERSION,
      role: 'viewer',
      bench,
      link,
      identity: { protocol: 1, firmware: 'bench-mock', firmwareVersion: '1', channels: { thrust: 1000, voltage: 1000, current: 1000, rpm: 200 }, throttleCeiling: 0.9, heartbeatTimeoutMs: 300 },
      history: emptyBatch(),
      events: [],
      extras: {},
    };
    ws.send(JSON.stringify(snapshot));
    this.connected();
  }

  /** Sends text, waiting while the socket's buffer is over 8 MB (the page parses slower than we write). */
  async send(text: string): Promise<void> {
    const ws = this.socket!;
    while (ws.bufferedAmount > 8 * 2 ** 20) await new Promise((r) => setTimeout(r, 2));
    ws.send(text);
  }
}

/** Installed before the page's own scripts: wraps requestAnimationFrame to time each frame's work. */
const FRAME_PROBE = `
(() => {
  const raf = window.requestAnimationFrame.bind(window);
  const ch = new MessageChannel();
  const probe = { recording: false, work: [], intervals: [], lastFrame: null, frameTs: null, frameStart: 0, pageDrew: false, longTasks: [] };
  window.__frameProbe = probe;
  ch.port1.onmessage = () => {
    if (probe.recording && probe.pageDrew) probe.work.push(performance.now() - probe.frameStart);
    probe.pageDrew = false;
  };
  const begin = (ts) => {
    if (probe.frameTs === ts) return;
    probe.frameTs = ts;
    probe.frameStart = performance.now();
    ch.port2.postMessage(0);
  };
  window.requestAnimationFrame = (cb) => raf((ts) => { begin(ts); probe.pageDrew = true; cb(ts); });
  // Our own frame clock, so every frame is seen (and starts the timing) whether or not the page draws in it.
  const tick = (ts) => {
    begin(ts);
    if (probe.recording && probe.lastFrame !== null) probe.intervals.push(ts - probe.lastFrame);
    probe.lastFrame = ts;
    raf(tick);
  };
  raf(tick);
  try {
    new PerformanceObserver((list) => { if (probe.recording) for (const e of list.getEntries()) probe.longTasks.push(e.duration); }).observe({ type: 'longtask' });
  } catch {}
})();
`;

interface ProbeResult {
  work: number[];
  intervals: number[];
  longTasks: number[];
  redrawsPerS: Record<string, number>;
}

/** data-draws and data-points of every chart on the page, keyed "efficiency" or by channel. */
type ChartCounters = Record<string, { draws: number; points: number }>;


export async function benchDashboard(quick: boolean): Promise<DashboardBench> {
  // DUCTBENCH_WEB_DIR: another build of the dashboard, so two builds can be measured back to back on one machine.
  const webDir = process.env.DUCTBENCH_WEB_DIR ? resolve(process.env.DUCTBENCH_WEB_DIR) : resolve(BENCH_DIR, '../web');
  if (!existsSync(join(webDir, 'index.html'))) throw new Error(`no built dashboard in ${webDir} (npm run build)`);
  const mock = new MockDaemon(webDir);
  const url = await mock.start();
  const browser = await chromium.launch({
    executablePath: CHROMIUM,
    args: ['--headless', '--no-sandbox', '--disable-gpu', '--disable-background-networking', '--disable-component-update', '--no-first-run', '--disable-sync', '--enable-precise-memory-info'],
    timeout: 60_000,
  });
  let live: NodeJS.Timeout | null = null;
  try {
    const context = await browser.newContext({ viewport: { width: 1400, height: 1000 } });
    const page = await context.newPage();
    page.setDefaultTimeout(60_000);
    await page.addInitScript(FRAME_PROBE);
    await page.goto(url, { waitUntil: 'load' });
    await mock.connectedP;
    await page.waitForSelector('db-app[data-connection="live"]', { state: 'attached' });

    const ringInfo = () =>
      page.evaluate(() => {
        const app = document.querySelector('db-app') as unknown as { dashboard: { client: { ring: { appended: number; length: number; capacity: number } } } };
        const r = app.dashboard.client.ring;
        return { appended: r.appended, length: r.length, capacity: r.capacity };
      });

    // The hour, as fast as the page takes it; host times end now so the live window is full of it.
    const rows = HOUR_ROWS;
    const t0 = Date.now() - rows;
    const startHour = performance.now();
    for (let i = 0; i < rows; i += BURST_ROWS) await mock.send(batchJson(t0, i, Math.min(BURST_ROWS, rows - i)));
    for (;;) {
      const r = await ringInfo();
      if (r.appended >= rows) break;
      await new Promise((res) => setTimeout(res, 50));
    }
    const hourS = (performance.now() - startHour) / 1000;

    // Live 1 kHz in 50 ms batches, continuing the same clock.
    let next = rows;
    live = setInterval(() => {
      const due = Date.now() - t0;
      if (due > next) {
        void mock.send(batchJson(t0, next, due - next));
        next = due;
      }
    }, 50);

    const counters = () =>
      page.evaluate(() => {
        const root = document.querySelector('db-app')?.shadowRoot ?? document;
        const out: Record<string, { draws: number; points: number }> = {};
        for (const el of root.querySelectorAll('db-live-chart, db-efficiency-chart')) {
          const key = el.tagName === 'DB-EFFICIENCY-CHART' ? 'efficiency' : (el.getAttribute('channel') ?? '?');
          out[key] = { draws: Number(el.getAttribute('data-draws') ?? 0), points: Number(el.getAttribute('data-points') ?? 0) };
        }
        return out;
      }) as Promise<ChartCounters>;

    const measure = async (seconds: number): Promise<ProbeResult> => {
      const before = await counters();
      const started = performance.now();
      await page.evaluate(() => {
        const p = (window as unknown as { __frameProbe: { recording: boolean; work: number[]; intervals: number[]; longTasks: number[]; lastFrame: number | null } }).__frameProbe;
        p.work = [];
        p.intervals = [];
        p.longTasks = [];
        p.lastFrame = null;
        p.recording = true;
      });
      await new Promise((r) => setTimeout(r, seconds * 1000));
      const probe = await page.evaluate(() => {
        const p = (window as unknown as { __frameProbe: { recording: boolean; work: number[]; intervals: number[]; longTasks: number[] } }).__frameProbe;
        p.recording = false;
        return { work: p.work, intervals: p.intervals, longTasks: p.longTasks };
      });
      const after = await counters();
      const elapsedS = (performance.now() - started) / 1000;
      const redrawsPerS: Record<string, number> = {};
      for (const [k, v] of Object.entries(after)) redrawsPerS[k] = (v.draws - (before[k]?.draws ?? 0)) / elapsedS;
      return { ...probe, redrawsPerS };
    };
    const seconds = quick ? 3 : 6;
    await new Promise((r) => setTimeout(r, 1000)); // let the burst's last draws settle
    const w60 = await measure(seconds);
    await page.click('[data-testid="window-300"]');
    await new Promise((r) => setTimeout(r, 1000));
    const w300 = await measure(seconds);
    // DUCTBENCH_DASHBOARD_SHOT=file.png: the page as it stands after the measurement, to see the charts move.
    if (process.env.DUCTBENCH_DASHBOARD_SHOT) await page.screenshot({ path: process.env.DUCTBENCH_DASHBOARD_SHOT, fullPage: true });
    const charts = await counters();
    const chartPoints: Record<string, number> = {};
    for (const [k, v] of Object.entries(charts)) chartPoints[k] = v.points;
    const points = charts.thrust?.points ?? null;
    const cdp = await context.newCDPSession(page);
    await cdp.send('Performance.enable');
    const metrics = (await cdp.send('Performance.getMetrics')).metrics;
    const metric = (name: string) => (metrics.find((m) => m.name === name)?.value ?? NaN) / 2 ** 20;
    const ring = await ringInfo();
    const longTasks = [...w60.longTasks, ...w300.longTasks];
    return {
      rows_pushed: rows,
      ring_capacity_rows: ring.capacity,
      ring_rows_held: ring.length,
      hour_ingest_s: hourS,
      frame_work_60s: spread(w60.work),
      frame_work_300s: spread(w300.work),
      frame_interval_60s: spread(w60.intervals),
      frame_interval_300s: spread(w300.intervals),
      long_tasks: longTasks.length,
      longest_task_ms: longTasks.length ? Math.max(...longTasks) : 0,
      js_heap_used_mb: metric('JSHeapUsedSize'),
      js_heap_total_mb: metric('JSHeapTotalSize'),
      points_drawn_per_chart: points,
      chart_redraws_per_s_60s: w60.redrawsPerS,
      chart_redraws_per_s_300s: w300.redrawsPerS,
      chart_points: chartPoints,
    };
  } finally {
    if (live) clearInterval(live);
    await browser.close();
    await mock.stop();
  }
}
