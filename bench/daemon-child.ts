// Benchmark helper, run as its own process (with --expose-gc): the real daemon on a serial port, so its
// throughput and resident memory are measured without the benchmark's own clients in the same process. The
// parent connects a WebSocket client as a dashboard would, then sends "start"; the child arms the bench when
// asked (the producer acknowledges ARM and starts its flood, so the session recorder writes every sample),
// counts COUNT calibrated samples and reports the time and memory at the warm-up mark and at the end.
// Started as: node --expose-gc daemon-child.js '{"path":..., "dataDir":..., "arm":true, "count":N, "warmup":W}'

import { startDaemon } from '../server/daemon.js';
import { SessionStore } from '../server/store/store.js';
import { until } from './common.js';

export interface ChildConfig {
  path: string;
  dataDir: string | null;
  arm: boolean;
  /** Samples to count; 0 to run until told to close. */
  count: number;
  /** Sample after which the warm-up memory is read. */
  warmup: number;
}

export interface MemoryReading {
  rss_mb: number;
  heap_used_mb: number;
  external_mb: number;
}

export interface ChildResult {
  type: 'result';
  samples: number;
  ms: number;
  lines_per_s: number;
  warm: MemoryReading | null;
  end: MemoryReading;
  lines_bad: number;
  seq_gaps: number;
  /** Samples the session store holds after the daemon closed (the recorder's work, read back). */
  recorded_samples: number | null;
}

const cfg = JSON.parse(process.argv[2]) as ChildConfig;
const gc = (globalThis as { gc?: () => void }).gc ?? (() => {});

function memory(): MemoryReading {
  gc();
  const m = process.memoryUsage();
  return { rss_mb: m.rss / 2 ** 20, heap_used_mb: m.heapUsed / 2 ** 20, external_mb: m.external / 2 ** 20 };
}

const d = await startDaemon({ source: { kind: 'serial', path: cfg.path }, httpPort: 0, log: () => {}, ...(cfg.dataDir ? { dataDir: cfg.dataDir } : {}) });
let n = 0;
let t0 = 0;
let warm: MemoryReading | null = null;
let finished: ((ms: number) => void) | null = null;
const done = new Promise<number>((r) => (finished = r));
d.onSample(() => {
  n++;
  if (n === 1) t0 = performance.now();
  // Read between samples, not inside the handler's hot loop: a forced GC here pauses ingest briefly.
  if (n === cfg.warmup) warm = memory();
  if (n === cfg.count) finished?.(performance.now() - t0);
});

process.on('message', (m: { type: string }) => {
  void (async () => {
    if (m.type === 'start') {
      await d.firstConnect;
      await until(() => d.controller.state === 'safe', 10_000, 'bench safe');
      if (cfg.arm) await d.controller.arm();
      if (cfg.count === 0) return;
      const ms = await done;
      const end = memory();
      const view = d.link.view();
      const sessionId = d.sessions?.sessionId ?? null;
      await d.close();
      let recorded: number | null = null;
      if (cfg.dataDir && sessionId !== null) {
        const store = SessionStore.open(cfg.dataDir);
        recorded = store.summary(sessionId).sample_count;
        store.close();
      }
      const result: ChildResult = {
        type: 'result',
        samples: n,
        ms,
        lines_per_s: (cfg.count - 1) / (ms / 1000),
        warm,
        end,
        lines_bad: Object.values(view.linesBad).reduce((a, b) => a + b, 0),
        seq_gaps: view.seqGaps,
        recorded_samples: recorded,
      };
      process.send?.(result);
    } else if (m.type === 'close') {
      await d.close();
      process.send?.({ type: 'closed' });
    }
  })().catch((err: Error) => {
    process.stderr.write(`daemon-child: ${err.message}\n`);
    process.exit(1);
  });
});
process.send?.({ type: 'listening', port: d.port, token: d.token });
