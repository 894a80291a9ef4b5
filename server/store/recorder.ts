// The live side of a session: the daemon hands every sample, operating point and event to a recorder, which
// buffers them and commits them in one transaction at least every flush interval (100 ms by default) or as
// soon as a batch fills. A process killed at any instant therefore loses at most the uncommitted batch.
//
// Writing must never take the bench down: a full disk or any other write error is caught here, the data is
// kept in memory (bounded: the oldest samples go first) and retried on the next tick, and the owner hears
// about it through onError. Nothing in here throws into the sample path.
//
// The retry is in bounded chunks, never the whole backlog in one transaction: points and events first (small,
// and what a run is for), then samples a chunk at a time, the chunk halved after each failure down to
// MIN_CHUNK rows and doubled back after each success. So freeing a little space is enough to make progress,
// and a recovered backlog drains over several ticks instead of one long transaction on the bench's thread.

import type { OperatingPoint } from '../bench/operating-point.js';
import type { Sample } from '../bench/telemetry.js';
import { sqliteCode } from './errors.js';
import type { FinalOutcome, StoredEvent } from './types.js';

/** What the store gives a recorder: one transaction per call; any of them may throw (disk full, I/O error). */
export interface RecorderSink {
  write(samples: readonly Sample[], points: readonly OperatingPoint[], events: readonly StoredEvent[], now: number): void;
  finish(outcome: FinalOutcome, endedAt: number): void;
  /** Says the recorder is alive when there is nothing to write (an idle bench). */
  heartbeat(now: number): void;
}

/** How often an idle recorder says it is alive; well inside the store's stale limit. */
export const HEARTBEAT_EVERY_MS = 5_000;

export interface RecorderOptions {
  /** Longest time data waits in memory before a commit is tried, ms. */
  flushIntervalMs?: number;
  /** A batch this large is committed at once, without waiting for the timer. */
  maxBatch?: number;
  /** Samples kept in memory while writes fail; beyond this the oldest are dropped (and counted). */
  maxPendingSamples?: number;
  /** Told when writing fails (first failure of an episode, then at most every `errorRepeatMs`), never throws back. */
  onError?: (e: RecorderWriteError) => void;
  /** Told once when writing works again after failures. */
  onRecovered?: (info: { dropped: number }) => void;
  errorRepeatMs?: number;
  /** Clock (ms since epoch); tests may pass their own. */
  now?: () => number;
}

export interface RecorderWriteError {
  sessionId: number;
  /** SQLite result code when there is one ("SQLITE_FULL" for a full disk or quota), else null. */
  code: string | null;
  message: string;
  /** Samples held in memory waiting for the disk. */
  pendingSamples: number;
  /** Samples given up so far because memory was full. */
  droppedSamples: number;
}

export type RecorderState = 'recording' | 'finished' | 'closed';

/** What a finished session holds against what was taken. */
export interface RecordSummary {
  /** Everything taken is in the file, and so is the outcome. */
  complete: boolean;
  samples_taken: number;
  samples_kept: number;
  points_taken: number;
  points_kept: number;
  /** The outcome could be written (else the session stays 'running' and the next open marks it interrupted). */
  outcome_written: boolean;
}

/** Smallest chunk of samples a retry tries (a few kB): what fits when almost nothing is free. */
export const MIN_CHUNK = 64;
/** Chunks one flush writes at most: a large backlog drains over several ticks. */
export const MAX_CHUNKS_PER_FLUSH = 16;

export function describeIncomplete(r: RecordSummary): string {
  return `record incomplete: ${r.points_kept} of ${r.points_taken} points and ${r.samples_kept} of ${r.samples_taken} samples kept${r.outcome_written ? '' : ', outcome not written'}`;
}

export const DEFAULT_FLUSH_INTERVAL_MS = 100;
export const DEFAULT_MAX_BATCH = 4096;
/** About 20 minutes at 500 samples/s, roughly 100 MB of objects: enough to ride out an operator freeing space. */
export const DEFAULT_MAX_PENDING_SAMPLES = 600_000;

export class SessionRecorder {
  private samples: Sample[] = [];
  private points: OperatingPoint[] = [];
  private events: StoredEvent[] = [];
  private timer: NodeJS.Timeout | null;
  private failing = false;
  private lastErrorAt = -Infinity;
  private dropped = 0;
  private written = 0;
  private pointsTaken = 0;
  private pointsWritten = 0;
  /** Samples per transaction now: maxBatch while writes succeed, smaller after failures. */
  private chunk: number;
  private lastBeat: number;
  private _state: RecorderState = 'recording';
  private readonly flushIntervalMs: number;
  private readonly maxBatch: number;
  private readonly maxPending: number;
  private readonly errorRepeatMs: number;
  private readonly now: () => number;

  constructor(
    readonly id: number,
    private readonly sink: RecorderSink,
    private readonly opts: RecorderOptions = {},
    private readonly onDone: (r: SessionRecorder) => void = () => {},
  ) {
    this.flushIntervalMs = opts.flushIntervalMs ?? DEFAULT_FLUSH_INTERVAL_MS;
    this.maxBatch = opts.maxBatch ?? DEFAULT_MAX_BATCH;
    this.maxPending = Math.max(this.maxBatch, opts.maxPendingSamples ?? DEFAULT_MAX_PENDING_SAMPLES);
    this.errorRepeatMs = opts.errorRepeatMs ?? 10_000;
    this.chunk = this.maxBatch;
    this.now = opts.now ?? Date.now;
    this.lastBeat = this.now();
    this.timer = setInterval(() => this.flush(), this.flushIntervalMs);
    // The recorder must not keep a finished daemon alive.
    this.timer.unref();
  }

  get state(): RecorderState {
    return this._state;
  }

  /** Samples, points and events waiting for a commit. */
  get pending(): { samples: number; points: number; events: number } {
    return { samples: this.samples.length, points: this.points.length, events: this.events.length };
  }

  get droppedSamples(): number {
    return this.dropped;
  }

  get writtenSamples(): number {
    return this.written;
  }

  addSample(s: Sample): void {
    if (this._state !== 'recording') return;
    this.samples.push(s);
    if (this.samples.length > this.maxPending) {
      // Writes have been failing for a long while: keep the most recent data, it is what explains a failure.
      // Dropping a whole batch at a time keeps this amortised O(1) per sample.
      const excess = this.samples.length - this.maxPending + this.maxBatch;
      this.samples.splice(0, excess);
      this.dropped += excess;
    }
    if (this.samples.length >= this.maxBatch && !this.failing) this.flush();
  }

  /** Operating points and events are rare and matter: they are committed at once, with the samples before them. */
  addPoint(p: OperatingPoint): void {
    if (this._state !== 'recording') return;
    this.points.push(p);
    this.pointsTaken++;
    this.flush();
  }

  addEvent(e: StoredEvent): void {
    if (this._state !== 'recording') return;
    this.events.push(e);
    // Bounded like the samples, for a bench that keeps warning while the disk is full.
    if (this.events.length > 10_000) this.events.splice(0, this.events.length - 10_000);
    this.flush();
  }

  /** Commits what is pending, at most `maxChunks` sample chunks. Returns true when nothing is left waiting. Never throws. */
  flush(maxChunks = MAX_CHUNKS_PER_FLUSH): boolean {
    if (this._state === 'closed') return false;
    if (this.samples.length === 0 && this.points.length === 0 && this.events.length === 0) {
      const now = this.now();
      if (now - this.lastBeat >= HEARTBEAT_EVERY_MS) {
        this.lastBeat = now;
        try {
          this.sink.heartbeat(now);
        } catch {
          /* a missed heartbeat only matters after a minute of them; real write errors surface with data */
        }
      }
      return true;
    }
    let progress = false;
    if (this.points.length || this.events.length) {
      // While writes succeed, the samples before a point go in the same transaction (one commit, as before).
      const head = this.failing ? [] : this.samples.slice(0, Math.min(this.samples.length, this.chunk));
      try {
        this.sink.write(head, this.points, this.events, this.now());
      } catch (err) {
        this.failed(err);
        return false;
      }
      this.pointsWritten += this.points.length;
      this.points = [];
      this.events = [];
      this.took(head.length);
      progress = true;
    }
    for (let chunks = 0; this.samples.length > 0 && chunks < maxChunks; chunks++) {
      const n = Math.min(this.chunk, this.samples.length);
      // Only the chunk is handed over; a failed transaction rolled back, so the same rows are retried next time.
      const part = n === this.samples.length ? this.samples : this.samples.slice(0, n);
      try {
        this.sink.write(part, [], [], this.now());
      } catch (err) {
        this.failed(err);
        return false;
      }
      this.took(n);
      progress = true;
    }
    if (progress) {
      this.lastBeat = this.now();
      if (this.failing) {
        this.failing = false;
        try {
          this.opts.onRecovered?.({ dropped: this.dropped });
        } catch {
          /* an owner's callback must not break recording */
        }
      }
    }
    return this.samples.length === 0;
  }

  private took(n: number): void {
    if (n === 0) return;
    if (n === this.samples.length) this.samples = [];
    else this.samples.splice(0, n);
    this.written += n;
    this.chunk = Math.min(this.maxBatch, this.chunk * 2);
  }

  private failed(err: unknown): void {
    this.chunk = Math.max(MIN_CHUNK, Math.floor(this.chunk / 2));
    this.reportError(err);
  }

  /** What is in the file against what was taken, so far. */
  summary(outcomeWritten = false): RecordSummary {
    const taken = this.written + this.samples.length + this.dropped;
    const points = this.pointsWritten;
    return {
      complete: outcomeWritten && this.written === taken && points === this.pointsTaken,
      samples_taken: taken,
      samples_kept: this.written,
      points_taken: this.pointsTaken,
      points_kept: points,
      outcome_written: outcomeWritten,
    };
  }

  /**
   * Commits what is left and closes the session with its outcome. If the disk still refuses, the session stays
   * 'running' in the file and the next open marks it interrupted; the return value says whether it was written.
   */
  finish(outcome: FinalOutcome, at: number = this.now()): RecordSummary {
    if (this._state !== 'recording') return this.summary(false);
    this.events.push({ t: at, level: outcome === 'completed' ? 'info' : 'warn', kind: 'session', text: `session ${outcome}` });
    // Everything that will still go, chunk by chunk, until a chunk fails.
    const drained = this.flush(Infinity);
    if (!drained) {
      // One last small try for what matters most: the points and events, without the samples.
      const samples = this.samples;
      this.samples = [];
      this.failing = true;
      this.flush(0);
      this.samples = samples;
    }
    let outcomeWritten = false;
    const partial = this.summary(true);
    try {
      if (!partial.complete) {
        // The session says what it holds, when the disk lets it say anything at all.
        const text = describeIncomplete({ ...partial, outcome_written: true });
        this.sink.write([], [], [{ t: at, level: 'error', kind: 'recording_incomplete', text, data: { ...partial, outcome_written: undefined } }], at);
      }
      if (this.points.length === 0 && this.events.length === 0) {
        this.sink.finish(outcome, at);
        outcomeWritten = true;
      }
    } catch (err) {
      this.reportError(err);
    }
    const summary = this.summary(outcomeWritten);
    this.stop('finished');
    return summary;
  }

  /** Stops the timer without finishing (the store is closing); what could not be written is lost. */
  close(): void {
    if (this._state !== 'recording') return;
    this.flush();
    this.stop('closed');
  }

  private stop(state: RecorderState): void {
    this._state = state;
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
    this.onDone(this);
  }

  private reportError(err: unknown): void {
    const now = this.now();
    const first = !this.failing;
    this.failing = true;
    if (!first && now - this.lastErrorAt < this.errorRepeatMs) return;
    this.lastErrorAt = now;
    const e: RecorderWriteError = {
      sessionId: this.id,
      code: sqliteCode(err),
      message: err instanceof Error ? err.message : String(err),
      pendingSamples: this.samples.length,
      droppedSamples: this.dropped,
    };
    try {
      this.opts.onError?.(e);
    } catch {
      /* an owner's callback must not break recording */
    }
  }
}
