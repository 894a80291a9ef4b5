// The device checker's end of the line: a bare protocol driver over one Transport. Unlike DeviceLink it does
// nothing by itself (no automatic handshake, heartbeat only when asked), keeps every device line with its
// raw text and arrival time, and can write lines the encoder would never write (other number spellings,
// broken fields), because checking a firmware means sending it what a host might and seeing what comes back.

import { performance } from 'node:perf_hooks';
import { decodeLine, encodeLine, nextSeq, withChecksum, type DecodeErrorReason } from '../../firmware-protocol/src/codec.js';
import { LineSplitter } from '../../firmware-protocol/src/lines.js';
import type { DeviceFrame, FieldsOf, FrameOf, HostCommandTag } from '../../firmware-protocol/src/messages.js';
import type { Transport } from '../link/transport.js';

export interface Received {
  frame: DeviceFrame;
  /** The line as it arrived, without its newline. */
  raw: string;
  /** performance.now() when it arrived. */
  at: number;
}

export type Answer = { kind: 'ack'; at: number } | { kind: 'nak'; why: string; at: number } | { kind: 'none' };

export class Probe {
  readonly received: Received[] = [];
  readonly bad: { reason: DecodeErrorReason | 'too_long'; raw: string }[] = [];
  private seq = 0;
  private readonly splitter: LineSplitter;
  private transport: Transport | null = null;
  private closedWith: Error | null = null;
  private hbTimer: NodeJS.Timeout | null = null;
  /** performance.now() when the last HB was handed to the operating system. */
  lastHbAt = 0;
  private writing: Promise<void> = Promise.resolve();

  constructor(private readonly make: () => Transport) {
    this.splitter = new LineSplitter(
      (line) => this.onLine(line),
      () => this.bad.push({ reason: 'too_long', raw: '' }),
    );
  }

  /** The port last opened, for the report. */
  description = '';

  get baudRate(): number | undefined {
    return this.transport?.baudRate;
  }

  async open(): Promise<void> {
    const t = this.make();
    this.splitter.reset();
    this.closedWith = null;
    await t.open({
      onData: (chunk) => this.splitter.push(chunk),
      onClose: (err) => {
        this.closedWith = err ?? new Error('closed');
      },
    });
    this.transport = t;
    this.description = t.description;
  }

  async close(): Promise<void> {
    this.heartbeat(null);
    const t = this.transport;
    this.transport = null;
    await this.writing.catch(() => {});
    if (t) await t.close().catch(() => {});
  }

  /** Index of the next line to arrive: pass it to the waits below to look only at what comes after. */
  mark(): number {
    return this.received.length;
  }

  /** Writes one line (a body such as "THR 4 v=0." is signed here). Resolves once it is with the OS. */
  writeRaw(body: string): Promise<void> {
    const t = this.transport;
    if (!t) return Promise.reject(new Error('port not open'));
    const line = withChecksum(body) + '\n';
    this.writing = this.writing.then(() => t.write(line));
    return this.writing;
  }

  /** Sends an encoded message; returns its sequence number. */
  async send<M extends HostCommandTag>(tag: M, fields: FieldsOf<M>): Promise<number> {
    const seq = this.takeSeq();
    const t = this.transport;
    if (!t) throw new Error('port not open');
    const line = encodeLine(tag, seq, fields);
    this.writing = this.writing.then(() => t.write(line));
    await this.writing;
    if (tag === 'HB') this.lastHbAt = performance.now();
    return seq;
  }

  takeSeq(): number {
    const s = this.seq;
    this.seq = nextSeq(this.seq);
    return s;
  }

  /** Sends an acknowledged command and waits for its ACK or NAK (by ref) up to timeoutMs. */
  async command<M extends HostCommandTag>(tag: M, fields: FieldsOf<M>, timeoutMs: number): Promise<Answer> {
    const from = this.mark();
    const seq = await this.send(tag, fields);
    return this.answerTo(seq, from, timeoutMs);
  }

  /** Like command() for a hand-written body "TAG <seq> ..."; `<seq>` is replaced by a fresh sequence number. */
  async commandRaw(bodyWithSeq: string, timeoutMs: number): Promise<Answer> {
    const from = this.mark();
    const seq = this.takeSeq();
    await this.writeRaw(bodyWithSeq.replace('<seq>', String(seq)));
    return this.answerTo(seq, from, timeoutMs);
  }

  async answerTo(seq: number, from: number, timeoutMs: number): Promise<Answer> {
    const r = await this.waitFor((f) => (f.tag === 'ACK' || f.tag === 'NAK') && f.fields.ref === seq, timeoutMs, from);
    if (!r) return { kind: 'none' };
    return r.frame.tag === 'ACK' ? { kind: 'ack', at: r.at } : { kind: 'nak', why: (r.frame as FrameOf<'NAK'>).fields.why, at: r.at };
  }

  /** The first line from index `from` on that matches, waiting up to timeoutMs; null when none came. */
  async waitFor(pred: (f: DeviceFrame, r: Received) => boolean, timeoutMs: number, from = this.mark()): Promise<Received | null> {
    const deadline = performance.now() + timeoutMs;
    for (;;) {
      for (let i = from; i < this.received.length; i++) if (pred(this.received[i].frame, this.received[i])) return this.received[i];
      from = this.received.length;
      if (performance.now() >= deadline || this.closedWith) return null;
      await new Promise((r) => setTimeout(r, 2));
    }
  }

  /** A fresh STAT: asks STATUS and returns the next STAT. */
  async status(timeoutMs: number): Promise<FrameOf<'STAT'> | null> {
    const from = this.mark();
    await this.send('STATUS', {});
    const r = await this.waitFor((f) => f.tag === 'STAT', timeoutMs, from);
    return r ? (r.frame as FrameOf<'STAT'>) : null;
  }

  /** Starts (period in ms) or stops (null) sending HB. */
  heartbeat(periodMs: number | null): void {
    if (this.hbTimer) clearInterval(this.hbTimer);
    this.hbTimer = null;
    if (periodMs === null) return;
    const beat = () => void this.send('HB', {}).catch(() => {});
    beat();
    this.hbTimer = setInterval(beat, periodMs);
  }

  sleep(ms: number): Promise<void> {
    return new Promise((r) => setTimeout(r, ms));
  }

  private onLine(line: string): void {
    const r = decodeLine(line, 'd2h');
    if (!r.ok) {
      if (r.reason !== 'empty') this.bad.push({ reason: r.reason, raw: line });
      return;
    }
    this.received.push({ frame: r as unknown as DeviceFrame, raw: line.replace(/\r$/, ''), at: performance.now() });
  }
}
