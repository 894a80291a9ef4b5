// Benchmark (not a test): does the safety path keep its timing whatever the dashboards do? Four processes: the
// virtual bench behind a pty (the board, keeping wall-clock time, counting the host's heartbeats and their
// longest gap), the daemon (web-stall-child.ts: serial link, motor running, history as after an hour of 1 kHz
// telemetry), a crowd of N dashboards connecting at once (crowd-child.ts), and this one, which only opens and
// closes measuring windows. For N = 0, 50 and 200, a window with the crowd connecting stands beside a window of
// the same length with the web side idle, measured just before it; a last window has the web side's event
// loop blocked for 2 s. Figures: the longest gap between heartbeats at the board, and the longest stall of
// the daemon's bench thread (a 5 ms timer's lateness; perf_hooks' event-loop delay).
// Runs in `npm run bench` (part "webstall") or alone: node dist/bench/web-stall.js [--quick]

import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { Crowd } from './crowd.js';
import type { LoopWindow } from './web-stall-child.js';

const SIM_CHILD = fileURLToPath(new URL('../../test/helpers/sim-child.mjs', import.meta.url));
const DAEMON_CHILD = fileURLToPath(new URL('./web-stall-child.js', import.meta.url));

/** A child that prints one JSON "ready" line, then answers one JSON request a line by id. */
class LineChild {
  private nextId = 1;
  private readonly waiting = new Map<number, (m: Record<string, unknown>) => void>();
  private buf = '';
  stderr = '';
  readonly ready: Promise<Record<string, unknown>>;
  private onReady: ((m: Record<string, unknown>) => void) | null = null;

  constructor(private readonly child: ChildProcess) {
    this.ready = new Promise((resolve, reject) => {
      this.onReady = resolve;
      child.once('exit', (code) => reject(new Error(`child exited (${code}) before it was ready: ${this.stderr}`)));
    });
    child.stderr!.on('data', (d: Buffer) => (this.stderr += d.toString()));
    child.stdout!.on('data', (d: Buffer) => {
      this.buf += d.toString();
      let nl;
      while ((nl = this.buf.indexOf('\n')) >= 0) {
        const line = this.buf.slice(0, nl);
        this.buf = this.buf.slice(nl + 1);
        if (!line.startsWith('{')) {
          // What node itself prints (--trace-gc) is passed on.
          process.stderr.write(line + '\n');
          continue;
        }
        const m = JSON.parse(line) as Record<string, unknown>;
        if (m.id === undefined && this.onReady) {
          this.onReady(m);
          this.onReady = null;
        } else if (typeof m.id === 'number') {
          this.waiting.get(m.id)?.(m);
          this.waiting.delete(m.id);
        }
      }
    });
  }

  static start(file: string, arg: unknown, nodeArgs: string[] = []): LineChild {
    return new LineChild(spawn(process.execPath, [...nodeArgs, file, JSON.stringify(arg)], { stdio: ['pipe', 'pipe', 'pipe'] }));
  }

  request(op: string, extra: Record<string, unknown> = {}): Promise<Record<string, unknown>> {
    const id = this.nextId++;
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`no answer to ${op}: ${this.stderr}`)), 30_000);
      this.waiting.set(id, (m) => {
        clearTimeout(timer);
        resolve(m);
      });
      this.child.stdin!.write(JSON.stringify({ id, op, ...extra }) + '\n');
    });
  }

  close(): Promise<void> {
    if (this.child.exitCode !== null) return Promise.resolve();
    return new Promise((resolve) => {
      this.child.once('exit', () => resolve());
      this.child.stdin!.end();
      setTimeout(() => this.child.kill('SIGKILL'), 5000).unref();
    });
  }
}

export interface StallWindow extends LoopWindow {
  /** Longest gap between two heartbeats at the board (its own clock), ms. */
  hb_gap_max_ms: number;
  heartbeats: number;
  /** The daemon still running, no latch, at the end of the window. */
  running: boolean;
  /** Time until every dashboard of the crowd had its snapshot (ms), for crowd windows. */
  crowd_ready_ms?: number;
  snapshot_kb?: number;
}

export interface WebStallResult {
  heartbeat_timeout_ms: number | null;
  window_ms: number;
  crowds: { n: number; idle: StallWindow; crowd: StallWindow }[];
  blocked: StallWindow;
}

const sleep = (ms: number) => new Promise((r) => setTimeout(r, Math.max(0, ms)));

export async function benchWebStall(opts: { quick?: boolean; sizes?: number[] } = {}): Promise<WebStallResult> {
  const windowMs = opts.quick ? 3000 : 5000;
  const board = LineChild.start(SIM_CHILD, { seed: 17 });
  let daemon: LineChild | null = null;
  try {
    const devicePath = (await board.ready).devicePath as string;
    // DUCTBENCH_WEBSTALL_NODE_ARGS="--trace-gc" (or --cpu-prof) looks inside the daemon's process.
    daemon = LineChild.start(DAEMON_CHILD, { path: devicePath, throttle: 0.3 }, (process.env.DUCTBENCH_WEBSTALL_NODE_ARGS ?? '').split(' ').filter(Boolean));
    const info = await daemon.ready;
    const dm = daemon;
    const window = async (action: () => Promise<Partial<StallWindow>>): Promise<StallWindow> => {
      await board.request('heartbeats', { reset: true });
      await dm.request('start');
      const t0 = performance.now();
      const extra = await action();
      await sleep(windowMs - (performance.now() - t0));
      const hb = (await board.request('heartbeats')).heartbeats as { count: number; maxGapMs: number };
      const end = await dm.request('end');
      return { ...(end.window as LoopWindow), hb_gap_max_ms: hb.maxGapMs, heartbeats: hb.count, running: end.state === 'running' && end.fault === 'none', ...extra };
    };
    const crowds: WebStallResult['crowds'] = [];
    for (const n of opts.sizes ?? [0, 50, 200]) {
      const idle = await window(async () => ({}));
      let crowd: Crowd | null = null;
      const loaded = await window(async () => {
        crowd = await Crowd.connect(info.port as number, info.token as string, n);
        return { crowd_ready_ms: crowd.ready.ms, snapshot_kb: n ? crowd.ready.bytes / n / 1024 : 0 };
      });
      await (crowd as Crowd | null)?.close();
      crowds.push({ n, idle, crowd: loaded });
      await sleep(1000);
    }
    const blocked = await window(async () => {
      await dm.request('stall', { ms: 2000 });
      return {};
    });
    return { heartbeat_timeout_ms: (info.heartbeatTimeoutMs as number | null) ?? null, window_ms: windowMs, crowds, blocked };
  } finally {
    await daemon?.close();
    await board.close();
  }
}

if (process.argv[1] !== undefined && import.meta.url === new URL(`file://${process.argv[1]}`).href) {
  const r = await benchWebStall({ quick: process.argv.includes('--quick') });
  const f = (x: number) => x.toFixed(1).padStart(7);
  process.stdout.write(`heartbeat time-out ${r.heartbeat_timeout_ms} ms, windows of ${r.window_ms} ms\n`);
  process.stdout.write('dashboards | hb gap at board (idle / crowd) ms | hb gap as written | bench-thread stall | crowd ready ms\n');
  for (const c of r.crowds) {
    process.stdout.write(
      `${String(c.n).padStart(10)} | ${f(c.idle.hb_gap_max_ms)} / ${f(c.crowd.hb_gap_max_ms)} | ${f(c.idle.hb_written_gap_max_ms)} / ${f(c.crowd.hb_written_gap_max_ms)} | ${f(c.idle.timer_late_max_ms)} / ${f(c.crowd.timer_late_max_ms)} | ${f(c.crowd.crowd_ready_ms ?? 0)}\n`,
    );
  }
  const b = r.blocked;
  process.stdout.write(`web side blocked 2 s: hb gap at board ${f(b.hb_gap_max_ms)}, as written ${f(b.hb_written_gap_max_ms)}, bench-thread stall ${f(b.timer_late_max_ms)} ms, running ${b.running}\n`);
  process.stdout.write(JSON.stringify(r, null, 2) + '\n');
}
