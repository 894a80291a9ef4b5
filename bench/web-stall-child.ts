// Benchmark helper, run as its own process: the daemon on a serial port (the board in a third process), its
// web side's history ring filled as after an hour of 1 kHz telemetry, the motor running. It measures its own
// bench thread's event loop in windows the parent opens and closes over stdin (one JSON request a line):
// the longest a 5 ms timer came late, and perf_hooks' event-loop delay. The dashboards that load it connect
// from yet another process (crowd-child.ts), so this process does only what a daemon does.
// Started as: node dist/bench/web-stall-child.js '{"path":"/dev/pts/N"}'

import { createInterface } from 'node:readline';
import { monitorEventLoopDelay } from 'node:perf_hooks';
import { HISTORY_CAPACITY, startDaemon } from '../server/daemon.js';
import { seedHistory } from './crowd.js';

export interface LoopWindow {
  /** Longest gap between two heartbeats as the daemon wrote them (ms): the board's figure minus the pty relay. */
  hb_written_gap_max_ms: number;
  /** Longest lateness of a 5 ms timer on the bench's thread (ms). */
  timer_late_max_ms: number;
  /** perf_hooks event-loop delay over the window (ms). */
  delay_max_ms: number;
  delay_p99_ms: number;
}

const cfg = JSON.parse(process.argv[2]) as { path: string; throttle: number };
const say = (obj: unknown) => process.stdout.write(JSON.stringify(obj) + '\n');
const d = await startDaemon({ source: { kind: 'serial', path: cfg.path }, httpPort: 0, log: () => {} });
seedHistory((s) => d.web.addSample(s), HISTORY_CAPACITY, 1000, Date.now());
await d.firstConnect;
if (!d.link.isReady) throw new Error(`no device: ${d.link.view().error?.message}`);
// The first dashboard of a crowd becomes the controlling one, and its leaving stops the motor (as it should):
// every window starts by bringing the motor back up, before anything is measured.
async function running(): Promise<void> {
  for (let attempt = 0; d.controller.state !== 'running'; attempt++) {
    try {
      if (d.controller.state === 'tripped') await d.controller.acknowledge();
      if (d.controller.state === 'safe') await d.controller.arm();
      await d.controller.setThrottle(cfg.throttle);
    } catch (err) {
      if (attempt >= 5) throw err;
      await new Promise((r) => setTimeout(r, 500));
    }
  }
}
await running();

const TICK_MS = 5;
let lateMax = 0;
let last = performance.now();
setInterval(() => {
  const now = performance.now();
  lateMax = Math.max(lateMax, now - last - TICK_MS);
  last = now;
}, TICK_MS);
let hbLast: number | null = null;
let hbGapMax = 0;
d.link.on('written', (w) => {
  if (w.tag !== 'HB') return;
  const now = performance.now();
  if (hbLast !== null) hbGapMax = Math.max(hbGapMax, now - hbLast);
  hbLast = now;
});
const h = monitorEventLoopDelay({ resolution: 10 });
h.enable();

say({ type: 'ready', port: d.port, token: d.token, heartbeatTimeoutMs: d.link.identity?.heartbeatTimeoutMs ?? null });

createInterface({ input: process.stdin }).on('line', (line) => {
  const req = JSON.parse(line) as { id: number; op: 'start' | 'end' | 'stall'; ms?: number };
  switch (req.op) {
    case 'start':
      void running().then(
        () => {
          lateMax = 0;
          hbGapMax = 0;
          h.reset();
          say({ id: req.id, ok: true });
        },
        (err: Error) => say({ id: req.id, error: err.message }),
      );
      return;
    case 'end': {
      const w: LoopWindow = { hb_written_gap_max_ms: hbGapMax, timer_late_max_ms: lateMax, delay_max_ms: h.max / 1e6, delay_p99_ms: h.percentile(99) / 1e6 };
      say({ id: req.id, window: w, state: d.controller.state, fault: d.controller.view().fault });
      return;
    }
    case 'stall':
      d.web.stall(req.ms ?? 1000);
      say({ id: req.id, ok: true });
      return;
  }
});
process.stdin.on('end', () => void d.close().then(() => process.exit(0)));
