// Shared pieces of the benchmarks: percentiles, the producer process on a fresh pty pair, clocks.

import { fork, type ChildProcess } from 'node:child_process';
import { dirname } from 'node:path';
import { fileURLToPath } from 'node:url';
import { openPtyPair } from '../server/link/pty-pair.js';

export const BENCH_DIR = dirname(fileURLToPath(import.meta.url));

export type ProducerMode = 'flood' | 'paced' | 'trips';
/** Current the trips mode sends normally and in its offending line (A); the cut benchmark sets max_current_a = 2. */
export const TRIP_NORMAL_CURRENT_A = 0.5;
export const TRIP_OFFENDING_CURRENT_A = 3;
export const TRIP_LIMIT_A = 2;

export interface ProducerTripReport {
  type: 'trips';
  /** Monotonic ms (process.hrtime) at which each offending line was written, in order. */
  offendingWrittenAt: number[];
  /** Monotonic ms at which each STOP line arrived, in order, with its reason. */
  stopArrivedAt: { at: number; why: string }[];
}

export interface Spread {
  n: number;
  p50: number;
  p95: number;
  p99: number;
  max: number;
}

/** Nearest-rank percentile. */
export function percentile(xs: readonly number[], p: number): number {
  if (xs.length === 0) return NaN;
  const s = [...xs].sort((a, b) => a - b);
  return s[Math.min(s.length - 1, Math.max(0, Math.ceil((p / 100) * s.length) - 1))];
}

export function spread(xs: readonly number[]): Spread {
  return { n: xs.length, p50: percentile(xs, 50), p95: percentile(xs, 95), p99: percentile(xs, 99), max: xs.length ? Math.max(...xs) : NaN };
}

export function median(xs: readonly number[]): number {
  return percentile(xs, 50);
}

/** Monotonic ms on the same clock in every process of this machine (CLOCK_MONOTONIC). */
export const monoMs = (): number => Number(process.hrtime.bigint()) / 1e6;
/** This process's performance.now() expressed on the monotonic clock: add it to a performance.now() value. */
export function perfToMonoOffset(): number {
  let best = Infinity;
  let off = 0;
  // The pair is read back to back; keep the tightest of a few tries.
  for (let k = 0; k < 20; k++) {
    const a = performance.now();
    const m = monoMs();
    const b = performance.now();
    if (b - a < best) {
      best = b - a;
      off = m - (a + b) / 2;
    }
  }
  return off;
}

export interface ProducerHandle {
  /** The daemon's end of the pty pair. */
  path: string;
  child: ChildProcess;
  /** Asks the producer for its trip stamps (trips mode). */
  report(): Promise<ProducerTripReport>;
}

/** Runs fn with a producer on one end of a fresh pty pair; the producer and socat are stopped afterwards. */
export async function withProducer<T>(mode: ProducerMode, count: number, rate: number, fn: (p: ProducerHandle) => Promise<T>): Promise<T> {
  const pair = await openPtyPair();
  const child = fork(`${BENCH_DIR}/producer.js`, [pair.b, mode, String(count), String(rate)], { stdio: ['ignore', 'inherit', 'inherit', 'ipc'], execArgv: [] });
  try {
    await new Promise<void>((res, rej) => {
      child.once('message', () => res());
      child.once('exit', (c) => rej(new Error(`producer exited ${c}`)));
    });
    return await fn({
      path: pair.a,
      child,
      report: () =>
        new Promise<ProducerTripReport>((res) => {
          child.once('message', (m) => res(m as ProducerTripReport));
          child.send('report');
        }),
    });
  } finally {
    child.kill('SIGTERM');
    await new Promise((r) => (child.exitCode !== null ? r(null) : child.once('exit', r)));
    await pair.close();
  }
}

export function sleep(ms: number): Promise<void> {
  return new Promise((r) => setTimeout(r, ms));
}

/** Polls cond every few ms until true; rejects after timeoutMs. */
export async function until(cond: () => boolean, timeoutMs: number, what: string): Promise<void> {
  const end = Date.now() + timeoutMs;
  while (!cond()) {
    if (Date.now() > end) throw new Error(`timed out waiting for ${what}`);
    await sleep(2);
  }
}
