// The bench thread's handle on the web side (server/web/worker.ts, a worker thread). The daemon hands it
// every message for the dashboards and every calibrated sample; it batches the samples into columns and
// transfers them every batch interval, so the bench's thread does one postMessage per 50 ms for all of
// telemetry, however many dashboards are connected. Commands from dashboards come back through onMessage and
// are answered with what its promise gives.
//
// If the web side stops saying it is alive, the bench's thread keeps its timing all the same; the daemon
// decides what a silent web side means for a turning motor (server/daemon.ts, liveness). An exception that
// kills the worker is rethrown on the bench's thread, where the process-level policy (server/util/
// last-resort.ts) cuts, records and exits: without its web side nobody can see or stop the bench.

import { fileURLToPath } from 'node:url';
import { Worker } from 'node:worker_threads';
import type { ClientMessage, ServerMessage } from '../api/messages.js';
import { COLUMN_KEYS, LiveBatch } from '../bench/history.js';
import type { Sample } from '../bench/telemetry.js';
import type { ClientRef, ClientStat, ControllerLiveness, FromWeb, MirrorState, ToWeb, WebConfig } from './bridge.js';

export interface WebSideHandlers {
  onMessage(client: ClientRef, msg: ClientMessage): Promise<unknown>;
  onDisconnect(client: ClientRef): void;
  /** A request handler of the web side failed and answered 500 (for the log). */
  onHandlerError?(message: string): void;
  /** The session being recorded, for the sessions API (which refuses to delete it); read every batch interval. */
  recordingId?(): number | null;
}

export class WebStartError extends Error {
  constructor(
    message: string,
    readonly code: string | undefined,
  ) {
    super(message);
    this.name = 'WebStartError';
  }
}

function workerUrl(): URL {
  // dist/server/web/side.js -> its sibling worker.js; server/web/side.ts (vitest) -> the compiled worker in
  // dist/: a worker thread is plain Node, outside the test runner's TypeScript loader (npm test builds first).
  return import.meta.url.endsWith('.ts') ? new URL('../../dist/server/web/worker.js', import.meta.url) : new URL('./worker.js', import.meta.url);
}

export class WebSide {
  private readonly pending = new LiveBatch();
  private readonly flush: NodeJS.Timeout;
  private lastAliveAt = performance.now();
  private clients = 0;
  private ctl: ControllerLiveness | null = null;
  private lastRecordingId: number | null = null;
  private nextSeq = 1;
  private readonly statsWaiting = new Map<number, (v: { clients: ClientStat[]; snapshotsBuilt: number; snapshotsSent: number }) => void>();
  private closing: Promise<void> | null = null;

  private constructor(
    private readonly worker: Worker,
    readonly port: number,
    private readonly h: WebSideHandlers,
    batchIntervalMs: number,
  ) {
    this.flush = setInterval(() => this.tick(), batchIntervalMs);
    worker.on('message', (m: FromWeb) => this.onWeb(m));
  }

  static async start(cfg: WebConfig, initial: MirrorState, h: WebSideHandlers): Promise<WebSide> {
    const worker = new Worker(fileURLToPath(workerUrl()), { workerData: cfg });
    const init: ToWeb = { k: 'init', state: initial };
    worker.postMessage(init);
    const port = await new Promise<number>((resolve, reject) => {
      const onMsg = (m: FromWeb) => {
        if (m.k === 'listening') done(() => resolve(m.port));
        else if (m.k === 'failed') done(() => reject(new WebStartError(m.error, m.code)));
      };
      const onErr = (e: Error) => done(() => reject(e));
      const onExit = (code: number) => done(() => reject(new Error(`the web side exited (${code}) before listening`)));
      const done = (f: () => void) => {
        worker.off('message', onMsg);
        worker.off('error', onErr);
        worker.off('exit', onExit);
        f();
      };
      worker.on('message', onMsg);
      worker.on('error', onErr);
      worker.on('exit', onExit);
    }).catch(async (e: Error) => {
      await worker.terminate();
      throw e;
    });
    const side = new WebSide(worker, port, h, cfg.batchIntervalMs);
    worker.on('error', (err) => {
      if (side.closing) return;
      // Rethrown outside any handler: the process-level policy takes it from here.
      setImmediate(() => {
        throw Object.assign(new Error(`the web side failed: ${err.message}`), { cause: err });
      });
    });
    return side;
  }

  /** Dashboards connected, as the web side last said. */
  get size(): number {
    return this.clients;
  }

  /** The controlling dashboard, as the web side last said. */
  get controller(): ControllerLiveness | null {
    return this.ctl;
  }

  /** Milliseconds since the web side last said it was alive (bench thread's monotonic clock). */
  silentForMs(now = performance.now()): number {
    return now - this.lastAliveAt;
  }

  broadcast(msg: ServerMessage): void {
    this.post({ k: 'broadcast', msg });
  }

  /** Bench state a snapshot carries that is not itself a broadcast message. */
  mirror(part: Omit<Extract<ToWeb, { k: 'mirror' }>, 'k'>): void {
    this.post({ k: 'mirror', ...part });
  }

  addSample(s: Sample): void {
    this.pending.add(s);
  }

  /** Per-client buffers and dropped batches, and how many snapshots were built and sent (diagnostics, tests). */
  stats(): Promise<{ clients: ClientStat[]; snapshotsBuilt: number; snapshotsSent: number }> {
    const seq = this.nextSeq++;
    return new Promise((resolve) => {
      this.statsWaiting.set(seq, resolve);
      this.post({ k: 'stats', seq });
    });
  }

  /** Blocks the web side's event loop for ms (diagnostics, tests, the benchmark): the bench's thread goes on. */
  stall(ms: number): void {
    this.post({ k: 'stall', ms });
  }

  close(): Promise<void> {
    if (this.closing) return this.closing;
    clearInterval(this.flush);
    this.closing = new Promise<void>((resolve) => {
      const timer = setTimeout(() => void this.worker.terminate().then(() => resolve()), 3000);
      this.worker.once('exit', () => {
        clearTimeout(timer);
        resolve();
      });
      this.worker.on('message', (m: FromWeb) => {
        if (m.k === 'closed') void this.worker.terminate();
      });
      this.post({ k: 'close' });
    });
    return this.closing;
  }

  private post(m: ToWeb, transfer?: ArrayBuffer[]): void {
    if (this.closing && m.k !== 'close') return;
    this.worker.postMessage(m, transfer);
  }

  private tick(): void {
    const id = this.h.recordingId?.() ?? null;
    if (id !== this.lastRecordingId) {
      this.lastRecordingId = id;
      this.mirror({ recordingId: id });
    }
    if (this.pending.size === 0) return;
    const { cols, n } = this.pending.drain();
    this.post({ k: 'samples', cols, n }, COLUMN_KEYS.map((k) => cols[k].buffer as ArrayBuffer));
  }

  private onWeb(m: FromWeb): void {
    switch (m.k) {
      case 'alive':
        this.lastAliveAt = performance.now();
        this.clients = m.clients;
        this.ctl = m.controller;
        return;
      case 'message': {
        const reply = (r: ToWeb) => this.post(r);
        let p: Promise<unknown>;
        try {
          p = this.h.onMessage(m.client, m.msg);
        } catch (err) {
          p = Promise.reject(err as Error);
        }
        p.then(
          (data) => reply({ k: 'reply', seq: m.seq, ok: true, data }),
          (err: Error & { issues?: unknown }) => {
            const issues = Array.isArray(err.issues) ? (err.issues as { path: unknown; rule: unknown }[]).map((i) => ({ path: String(i.path), rule: String(i.rule) })) : undefined;
            reply({ k: 'reply', seq: m.seq, ok: false, error: String(err?.message ?? err), ...(issues ? { issues } : {}) });
          },
        );
        return;
      }
      case 'disconnect':
        this.h.onDisconnect(m.client);
        return;
      case 'stats':
        this.statsWaiting.get(m.seq)?.(m);
        this.statsWaiting.delete(m.seq);
        return;
      case 'handler_error':
        this.h.onHandlerError?.(m.message);
        return;
      default:
        return;
    }
  }
}
