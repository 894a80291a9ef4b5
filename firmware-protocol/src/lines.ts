// Splits a byte stream into lines with a hard cap on the partial line held in memory. The stock readline
// parser keeps appending until it sees a delimiter, so a device (or a noisy cable) that never sends a newline
// would grow the daemon's memory without bound; here an over-long line is dropped, counted, and the splitter
// resynchronises on the next newline.

import { MAX_LINE_BYTES } from './messages.js';

export interface LineSplitterStats {
  lines: number;
  overlong: number;
}

/**
 * Offered each complete line as bytes before it becomes a string: returns true when it has consumed the line.
 * The bytes are only valid during the call (the chunk may be a pooled buffer).
 */
export type RawLineHandler = (buf: Buffer, start: number, end: number) => boolean;

export class LineSplitter {
  /** Bytes of the current partial line (never more than `cap`). */
  private partial: Buffer = Buffer.alloc(0);
  /** True while skipping the rest of an over-long line. */
  private discarding = false;
  readonly stats: LineSplitterStats = { lines: 0, overlong: 0 };

  constructor(
    private readonly onLine: (line: string) => void,
    private readonly onOverlong: (droppedBytes: number) => void = () => {},
    /** Longest line kept, newline not counted; one byte of slack for a trailing CR. */
    readonly cap: number = MAX_LINE_BYTES + 1,
    /** Tried first on every line; a line it does not consume goes to onLine as a string. */
    private readonly onRaw: RawLineHandler | null = null,
  ) {}

  /** Bytes currently buffered; bounded by `cap`. */
  get buffered(): number {
    return this.partial.length;
  }

  push(chunk: Uint8Array | string): void {
    const buf = typeof chunk === 'string' ? Buffer.from(chunk, 'latin1') : Buffer.isBuffer(chunk) ? chunk : Buffer.from(chunk.buffer, chunk.byteOffset, chunk.byteLength);
    let start = 0;
    while (start < buf.length) {
      const nl = buf.indexOf(10, start);
      if (nl < 0) {
        this.hold(buf, start, buf.length);
        return;
      }
      if (this.discarding) {
        this.discarding = false;
      } else if (this.partial.length === 0) {
        if (nl - start > this.cap) this.overlong(nl - start);
        else this.emitRaw(buf, start, nl);
      } else {
        const total = this.partial.length + (nl - start);
        if (total > this.cap) this.overlong(total);
        else {
          const line = Buffer.concat([this.partial, buf.subarray(start, nl)]);
          this.emitRaw(line, 0, line.length);
        }
        this.partial = Buffer.alloc(0);
      }
      start = nl + 1;
    }
  }

  /** Drops any partial line (after a reconnect the first bytes belong to no line we started). */
  reset(): void {
    this.partial = Buffer.alloc(0);
    this.discarding = false;
  }

  private hold(buf: Buffer, from: number, to: number): void {
    if (this.discarding) return;
    const total = this.partial.length + (to - from);
    if (total > this.cap) {
      this.overlong(total);
      this.partial = Buffer.alloc(0);
      this.discarding = true;
      return;
    }
    // Copy: the caller's chunk may be a pooled buffer that is reused after we return.
    this.partial = Buffer.concat([this.partial, buf.subarray(from, to)]);
  }

  private emitRaw(buf: Buffer, start: number, end: number): void {
    if (this.onRaw !== null && this.onRaw(buf, start, end)) {
      this.stats.lines++;
      return;
    }
    this.emit(buf.toString('latin1', start, end));
  }

  private emit(line: string): void {
    this.stats.lines++;
    this.onLine(line);
  }

  private overlong(bytes: number): void {
    this.stats.overlong++;
    this.onOverlong(bytes);
  }
}
