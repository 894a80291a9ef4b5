// Notices when this process's event loop stalled (a long synchronous call, a blocking disk write, swap, a
// debugger pause). A stalled loop sends no heartbeat, drains no serial bytes and answers no dashboard, so the
// operator should hear about it even though the firmware has already cut the motor by then (its heartbeat
// time-out is at most 300 ms).
//
// How: a short repeating timer that expects to run every `intervalMs`. When it runs late by more than the
// threshold, the loop was blocked for about that long. The report can only come once the loop runs again:
// code on a stalled loop cannot speak during the stall, which is exactly why the cut lives in the firmware.
// perf_hooks' event-loop-delay histogram is sampled alongside for the summary (worst and 99th percentile),
// where it is available; the stall events themselves come from the timer, whose arithmetic tests can drive.

import { monitorEventLoopDelay, performance, type IntervalHistogram } from 'node:perf_hooks';
import { TypedEmitter } from './emitter.js';

export const DEFAULT_STALL_THRESHOLD_MS = 100;
export const DEFAULT_CHECK_INTERVAL_MS = 20;

export interface LoopStall {
  /** How long the loop was blocked beyond the timer's period, ms (at least the threshold). */
  stall_ms: number;
  /** The threshold in force, ms. */
  threshold_ms: number;
  /** When the loop ran again (the clock given, performance.now() by default), ms. */
  resumedAt: number;
}

export interface LoopMonitorEvents {
  stall: LoopStall;
}

export interface LoopMonitorStats {
  /** Stalls reported since start(). */
  stalls: number;
  /** Longest stall reported, ms (0 when none). */
  worst_stall_ms: number;
  /** From perf_hooks' histogram, ms; null where the histogram is not in use. */
  delay_p99_ms: number | null;
  delay_max_ms: number | null;
}

/** The timer seam: tests drive the monitor with their own clock and ticks. */
export interface LoopClock {
  now(): number;
  every(ms: number, fn: () => void): () => void;
}

const realClock: LoopClock = {
  now: () => performance.now(),
  every(ms, fn) {
    const t = setInterval(fn, ms);
    // A monitor must never be what keeps a finished process alive.
    t.unref();
    return () => clearInterval(t);
  },
};

export interface LoopMonitorOptions {
  /** Report a stall when the loop was blocked longer than this, ms (default 100). */
  thresholdMs?: number;
  /** Period of the check timer, ms (default 20). Smaller finds shorter stalls and costs more wake-ups. */
  intervalMs?: number;
  /** Also keep perf_hooks' event-loop-delay histogram for stats() (default true with the real clock). */
  histogram?: boolean;
  clock?: LoopClock;
}

export class LoopMonitor extends TypedEmitter<LoopMonitorEvents> {
  readonly thresholdMs: number;
  readonly intervalMs: number;
  private readonly clock: LoopClock;
  private readonly useHistogram: boolean;
  private cancel: (() => void) | null = null;
  private expectedAt = 0;
  private histogram: IntervalHistogram | null = null;
  private stallCount = 0;
  private worst = 0;

  constructor(opts: LoopMonitorOptions = {}) {
    super();
    this.thresholdMs = opts.thresholdMs ?? DEFAULT_STALL_THRESHOLD_MS;
    this.intervalMs = opts.intervalMs ?? DEFAULT_CHECK_INTERVAL_MS;
    if (!(this.thresholdMs > 0) || !Number.isFinite(this.thresholdMs)) throw new RangeError(`loop monitor: thresholdMs ${this.thresholdMs} must be a positive number`);
    if (!(this.intervalMs > 0) || !Number.isFinite(this.intervalMs)) throw new RangeError(`loop monitor: intervalMs ${this.intervalMs} must be a positive number`);
    this.clock = opts.clock ?? realClock;
    this.useHistogram = opts.histogram ?? opts.clock === undefined;
  }

  get running(): boolean {
    return this.cancel !== null;
  }

  start(): void {
    if (this.cancel) return;
    this.stallCount = 0;
    this.worst = 0;
    this.expectedAt = this.clock.now() + this.intervalMs;
    this.cancel = this.clock.every(this.intervalMs, () => this.check());
    if (this.useHistogram) {
      this.histogram = monitorEventLoopDelay({ resolution: 10 });
      this.histogram.enable();
    }
  }

  stop(): void {
    this.cancel?.();
    this.cancel = null;
    this.histogram?.disable();
  }

  stats(): LoopMonitorStats {
    const h = this.histogram;
    // The histogram reports nanoseconds; a histogram with no sample yet reports huge sentinels.
    const ok = h !== null && h.count > 0;
    return {
      stalls: this.stallCount,
      worst_stall_ms: this.worst,
      delay_p99_ms: ok ? h.percentile(99) / 1e6 : null,
      delay_max_ms: ok ? h.max / 1e6 : null,
    };
  }

  /** One timer run: how late is it? Public for tests that drive their own clock; the timer calls it otherwise. */
  check(): void {
    const now = this.clock.now();
    const late = now - this.expectedAt;
    // The next run is due one period from now, not from when this one was due: after a stall the timer does
    // not fire a burst of catch-up runs, and one stall is reported once.
    this.expectedAt = now + this.intervalMs;
    if (late <= this.thresholdMs) return;
    const stall: LoopStall = { stall_ms: Math.round(late * 10) / 10, threshold_ms: this.thresholdMs, resumedAt: now };
    this.stallCount++;
    this.worst = Math.max(this.worst, stall.stall_ms);
    this.emit('stall', stall);
  }
}
