// The device link: owns one transport at a time, turns its bytes into decoded frames, performs the protocol
// handshake, sends the heartbeat, is the single writer (with a capped queue), tracks command acknowledgements,
// counts bad lines and sequence gaps, and reconnects with growing back-off after an unplug.
//
// Nothing else in the daemon writes to the device: the bench controller calls send()/command()/sendUrgent().

import { decodeLine, encodeLine, nextSeq, seqGap, type DecodeErrorReason } from '../../firmware-protocol/src/codec.js';
import { LineSplitter } from '../../firmware-protocol/src/lines.js';
import { fastDecode } from '../../firmware-protocol/src/fast-decode.js';
import {
  ACK_TIMEOUT_MS,
  DEFAULT_BAUD,
  HANDSHAKE_TIMEOUT_MS,
  HELLO_RETRY_MS,
  heartbeatIntervalFor,
  heartbeatTimeoutProblem,
  lineBudget,
  type LineBudget,
} from '../../firmware-protocol/src/host-rules.js';
import {
  HEARTBEAT_INTERVAL_MS,
  PROTOCOL_VERSION,
  type BootCause,
  type DeviceFrame,
  type FieldsOf,
  type FrameOf,
  type HostCommandTag,
  type RefusalCode,
} from '../../firmware-protocol/src/messages.js';
import type { DeviceIdentity, LinkErrorKind, LinkStatus, LinkView } from '../api/messages.js';
import { TypedEmitter } from '../util/emitter.js';
import type { Transport } from './transport.js';

export class LinkError extends Error {
  constructor(
    readonly kind: LinkErrorKind,
    message: string,
  ) {
    super(message);
    this.name = 'LinkError';
  }
}

/** A command the device refused, with its reason. */
export class CommandRefused extends Error {
  constructor(
    readonly tag: HostCommandTag,
    readonly why: RefusalCode,
  ) {
    super(`device refused ${tag}: ${why}`);
    this.name = 'CommandRefused';
  }
}

/**
 * A command that got no answer in time (`noAck`: it was written and may or may not have been carried out), or
 * that never reached the device (the link went away first, the queue was full, an emergency stop dropped it).
 */
export class CommandTimeout extends Error {
  constructor(
    readonly tag: HostCommandTag,
    reason: string,
    readonly noAck = false,
  ) {
    super(`${tag}: ${reason}`);
    this.name = 'CommandTimeout';
  }
}

/** The link's defaults: the figures of firmware-protocol/src/host-rules.ts, which PROTOCOL.md tabulates. */
export const LINK_DEFAULTS = Object.freeze({
  handshakeTimeoutMs: HANDSHAKE_TIMEOUT_MS,
  helloRetryMs: HELLO_RETRY_MS,
  ackTimeoutMs: ACK_TIMEOUT_MS,
  reconnectInitialMs: 250,
  reconnectMaxMs: 5000,
  writeQueueCap: 64,
});

export interface LinkOptions {
  /** Makes a fresh transport for every (re)connection attempt. */
  transport: () => Transport;
  /** Give up on a handshake after this long (an Arduino that resets when the port opens needs ~2 s to boot). */
  handshakeTimeoutMs?: number;
  /** Resend HELLO this often while waiting for IDENT. */
  helloRetryMs?: number;
  reconnectInitialMs?: number;
  reconnectMaxMs?: number;
  /** Lines waiting to be written; beyond this new non-urgent lines are refused and counted. */
  writeQueueCap?: number;
  ackTimeoutMs?: number;
  /** A fixed heartbeat period; by default it follows the device's announced time-out (heartbeatIntervalFor). */
  heartbeatIntervalMs?: number | null;
  /** Stop retrying after a handshake failure of these kinds (the wrong device will not become the right one). */
  fatalKinds?: readonly LinkErrorKind[];
  /** Reconnect after losing the device (default true). */
  reconnect?: boolean;
}

export interface LinkEvents {
  status: LinkView;
  /** Every valid device frame, in arrival order, after the handshake. */
  frame: DeviceFrame;
  identity: DeviceIdentity | null;
  /** The link was ready and is not any more (unplug, reset, close). */
  lost: { error: LinkError | null };
  ready: DeviceIdentity;
  /** A line was written to the transport (after encoding); used by tests and the cut-latency benchmark. */
  written: { tag: HostCommandTag; seq: number; line: string };
  /** Something about the device worth telling the operator that does not stop the link (e.g. a byte budget). */
  warning: string;
}

interface Pending {
  tag: HostCommandTag;
  resolve: () => void;
  reject: (e: Error) => void;
  timer: NodeJS.Timeout;
}

interface QueuedLine {
  tag: HostCommandTag;
  seq: number;
  line: string;
}

/** What a run or a session reports about its link: lines taken, lines dropped by reason, gaps, refused writes. */
export interface LinkCounters {
  lines_ok: number;
  lines_bad: Record<string, number>;
  lines_bad_total: number;
  seq_gaps: number;
  write_dropped: number;
  reconnects: number;
}

/** The counters of a link view, or what they grew by since `since` (a session's share of a longer connection). */
export function linkCounters(v: LinkView, since?: LinkCounters | null): LinkCounters {
  const bad: Record<string, number> = {};
  let total = 0;
  for (const [k, n] of Object.entries(v.linesBad)) {
    const d = n - (since?.lines_bad[k] ?? 0);
    if (d > 0) {
      bad[k] = d;
      total += d;
    }
  }
  return {
    lines_ok: v.linesOk - (since?.lines_ok ?? 0),
    lines_bad: bad,
    lines_bad_total: total,
    seq_gaps: v.seqGaps - (since?.seq_gaps ?? 0),
    write_dropped: v.writeDropped - (since?.write_dropped ?? 0),
    reconnects: v.reconnects - (since?.reconnects ?? 0),
  };
}

export function identityFromFrame(f: FrameOf<'IDENT'>): DeviceIdentity {
  const channels: Record<string, number> = {};
  for (const item of f.fields.caps) {
    const [name, rate] = item.split('@');
    const r = Number(rate);
    if (name) channels[name] = Number.isFinite(r) ? r : 0;
  }
  return {
    protocol: f.fields.proto,
    firmware: f.fields.fw,
    firmwareVersion: f.fields.fwver,
    channels,
    throttleCeiling: f.fields.thrmax,
    heartbeatTimeoutMs: f.fields.hb,
    ...(f.fields.escrate !== undefined ? { escRateHz: f.fields.escrate } : {}),
  };
}

export class DeviceLink extends TypedEmitter<LinkEvents> {
  private readonly opts: Required<LinkOptions>;
  private transport: Transport | null = null;
  private splitter: LineSplitter;
  private statusValue: LinkStatus = 'idle';
  private source = '';
  private identityValue: DeviceIdentity | null = null;
  private txSeq = 0;
  private rxSeq: number | null = null;
  private readonly queue: QueuedLine[] = [];
  private writing = false;
  private readonly pending = new Map<number, Pending>();
  private heartbeatTimer: NodeJS.Timeout | null = null;
  private helloTimer: NodeJS.Timeout | null = null;
  private handshakeTimer: NodeJS.Timeout | null = null;
  private reconnectTimer: NodeJS.Timeout | null = null;
  private backoffMs: number;
  private retryAt: number | null = null;
  private lastError: LinkError | null = null;
  private wanted = false;
  /** Lines seen during the handshake that did not decode: tells "wrong device" from "silent device". */
  private handshakeJunk = 0;
  /** Set while the HELLO sent after a device reboot waits for its IDENT; its retry timer. */
  private rehandshake = false;
  private rehelloTimer: NodeJS.Timeout | null = null;
  /** Nonces of the HELLOs sent on this connection: an IDENT answers one of them or is not an answer. */
  private readonly nonces = new Set<number>();
  private nonceNext = Math.floor(Math.random() * 65536);
  /** IDENTs during the handshake that answered no HELLO of ours (no nonce, or a foreign one). */
  private unmatchedIdents = 0;
  /** The boot the device announced during this connection's handshake (an auto-reset on open), or null. */
  private bootValue: BootCause | null = null;
  private budgetValue: LineBudget | null = null;
  private heartbeatMs: number = HEARTBEAT_INTERVAL_MS;
  /** Bumped on every (re)connection so callbacks from an old transport are ignored. */
  private generation = 0;
  private counters = { linesOk: 0, linesBad: {} as Record<string, number>, seqGaps: 0, writeDropped: 0, reconnects: 0 };

  constructor(options: LinkOptions) {
    super();
    this.opts = {
      ...LINK_DEFAULTS,
      heartbeatIntervalMs: null,
      fatalKinds: [],
      reconnect: true,
      ...options,
    };
    this.backoffMs = this.opts.reconnectInitialMs;
    this.splitter = new LineSplitter(
      (line) => this.onLine(line),
      () => this.countBad('too_long'),
      undefined,
      // Telemetry is decoded straight from the bytes; any line the fast path is unsure of comes back as a
      // string to decodeLine, which gives the verdict.
      (buf, start, end) => {
        const f = fastDecode(buf, start, end, 'd2h');
        if (f === null) return false;
        this.onFrame(f as DeviceFrame);
        return true;
      },
    );
  }

  get status(): LinkStatus {
    return this.statusValue;
  }

  get identity(): DeviceIdentity | null {
    return this.identityValue;
  }

  get isReady(): boolean {
    return this.statusValue === 'ready';
  }

  /**
   * How the device said it booted while this connection was handshaking (a board that resets when its port is
   * opened), or null when it answered without booting. A reset latch with this set is the one the opening caused.
   */
  get bootOnConnect(): BootCause | null {
    return this.bootValue;
  }

  /** The worst-case byte rate of the declared channels against this line's baud rate; null before a handshake. */
  get lineBudget(): LineBudget | null {
    return this.budgetValue;
  }

  /** The heartbeat period in use (it follows the device's announced time-out). */
  get heartbeatIntervalMs(): number {
    return this.heartbeatMs;
  }

  /**
   * Ends the session cleanly: BYE, so the device disarms and stops watching the heartbeat rather than latching
   * heartbeat loss once the port closes. Resolves either way (false when there was no device or no answer).
   */
  async bye(timeoutMs = 500): Promise<boolean> {
    if (!this.isReady) return false;
    const answered = this.command('BYE', {}).then(
      () => true,
      () => false,
    );
    return Promise.race([answered, new Promise<boolean>((r) => setTimeout(() => r(false), timeoutMs).unref())]);
  }

  view(): LinkView {
    return {
      status: this.statusValue,
      source: this.source,
      linesOk: this.counters.linesOk,
      linesBad: { ...this.counters.linesBad },
      seqGaps: this.counters.seqGaps,
      writeDropped: this.counters.writeDropped,
      reconnects: this.counters.reconnects,
      retryInMs: this.retryAt === null ? null : Math.max(0, this.retryAt - Date.now()),
      error: this.lastError ? { kind: this.lastError.kind, message: this.lastError.message } : null,
    };
  }

  /**
   * Connects and handshakes. Resolves with the identity once ready; rejects with the LinkError of the first
   * attempt (the link keeps retrying in the background unless the error kind is fatal or reconnect is off).
   */
  start(): Promise<DeviceIdentity> {
    this.wanted = true;
    return new Promise((resolve, reject) => {
      const offReady = this.once('ready', (id) => {
        offLost();
        resolve(id);
      });
      const offLost = this.once('lost', ({ error }) => {
        offReady();
        reject(error ?? new LinkError('disconnected', 'link closed'));
      });
      void this.connect();
    });
  }

  /** Closes for good: no reconnect. Pending commands are rejected. */
  async close(): Promise<void> {
    this.wanted = false;
    if (this.reconnectTimer) clearTimeout(this.reconnectTimer);
    this.reconnectTimer = null;
    this.retryAt = null;
    const t = this.transport;
    this.teardown(null, 'closed');
    if (t) await t.close().catch(() => {});
  }

  /** Queues a line. Returns false when the queue is full (the line is dropped and counted). */
  send<M extends HostCommandTag>(tag: M, fields: FieldsOf<M>): boolean {
    if (!this.transport || (this.statusValue !== 'ready' && tag !== 'HELLO')) return false;
    if (this.queue.length >= this.opts.writeQueueCap) {
      this.counters.writeDropped++;
      return false;
    }
    const seq = this.takeSeq();
    this.queue.push({ tag, seq, line: encodeLine(tag, seq, fields) });
    this.pump();
    return true;
  }

  /** Sends an acknowledged command and resolves on ACK; rejects with CommandRefused on NAK, CommandTimeout otherwise. */
  command<M extends HostCommandTag>(tag: M, fields: FieldsOf<M>): Promise<void> {
    if (this.statusValue !== 'ready' || !this.transport) return Promise.reject(new CommandTimeout(tag, 'device not connected'));
    if (this.queue.length >= this.opts.writeQueueCap) {
      this.counters.writeDropped++;
      return Promise.reject(new CommandTimeout(tag, 'write queue full'));
    }
    const seq = this.takeSeq();
    const p = new Promise<void>((resolve, reject) => {
      const timer = setTimeout(() => {
        this.pending.delete(seq);
        reject(new CommandTimeout(tag, `no acknowledgement within ${this.opts.ackTimeoutMs} ms`, true));
      }, this.opts.ackTimeoutMs);
      this.pending.set(seq, { tag, resolve, reject, timer });
    });
    this.queue.push({ tag, seq, line: encodeLine(tag, seq, fields) });
    this.pump();
    return p;
  }

  /**
   * The emergency path: writes STOP ahead of everything queued, right now, and drops queued motor commands
   * (a THR queued before the stop must not reach the device after it). Returns the sequence number used, or
   * null when there is no device to stop. Resolves its promise on ACK if the caller cares.
   */
  sendUrgent(why: 'estop' | 'host_trip'): { seq: number; acked: Promise<void> } | null {
    const t = this.transport;
    if (!t || (this.statusValue !== 'ready' && this.statusValue !== 'handshaking')) return null;
    for (let i = this.queue.length - 1; i >= 0; i--) {
      const tag = this.queue[i].tag;
      if (tag === 'THR' || tag === 'ARM') {
        const [dropped] = this.queue.splice(i, 1);
        this.pending.get(dropped.seq)?.reject(new CommandTimeout(dropped.tag, 'dropped by emergency stop'));
        this.clearPending(dropped.seq);
      }
    }
    const seq = this.takeSeq();
    const line = encodeLine('STOP', seq, { why });
    const acked = new Promise<void>((resolve, reject) => {
      const timer = setTimeout(() => {
        this.pending.delete(seq);
        reject(new CommandTimeout('STOP', `no acknowledgement within ${this.opts.ackTimeoutMs} ms`, true));
      }, this.opts.ackTimeoutMs);
      this.pending.set(seq, { tag: 'STOP', resolve, reject, timer });
    });
    acked.catch(() => {}); // callers may ignore the ACK; an unhandled rejection must not crash the daemon
    // Written directly, not through the queue: at most one earlier line can be ahead of it in the OS buffer.
    const gen = this.generation;
    t.write(line).then(
      () => {
        if (gen === this.generation) this.emit('written', { tag: 'STOP', seq, line });
      },
      (err: Error) => this.onTransportClose(gen, err),
    );
    return { seq, acked };
  }

  private takeSeq(): number {
    const s = this.txSeq;
    this.txSeq = nextSeq(this.txSeq);
    return s;
  }

  private pump(): void {
    if (this.writing || !this.transport) return;
    const item = this.queue.shift();
    if (!item) return;
    this.writing = true;
    const gen = this.generation;
    this.transport.write(item.line).then(
      () => {
        if (gen !== this.generation) return;
        this.writing = false;
        this.emit('written', item);
        this.pump();
      },
      (err: Error) => {
        this.writing = false;
        this.onTransportClose(gen, err);
      },
    );
  }

  private async connect(): Promise<void> {
    if (!this.wanted) return;
    this.retryAt = null;
    const gen = ++this.generation;
    const transport = this.opts.transport();
    this.source = transport.description;
    this.setStatus('opening');
    try {
      await transport.open({
        onData: (chunk) => {
          if (gen === this.generation) this.splitter.push(chunk);
        },
        onClose: (error) => this.onTransportClose(gen, error ?? new Error('device closed the port')),
      });
    } catch (err) {
      if (gen !== this.generation) return;
      this.fail(new LinkError('open_failed', `cannot open ${transport.description}: ${(err as Error).message}`));
      return;
    }
    if (gen !== this.generation || !this.wanted) {
      await transport.close().catch(() => {});
      return;
    }
    this.transport = transport;
    this.splitter.reset();
    this.rxSeq = null;
    this.handshakeJunk = 0;
    this.unmatchedIdents = 0;
    this.rehandshake = false;
    this.nonces.clear();
    this.bootValue = null;
    this.budgetValue = null;
    this.setStatus('handshaking');
    this.hello();
    this.helloTimer = setInterval(() => this.hello(), this.opts.helloRetryMs);
    this.handshakeTimer = setTimeout(() => {
      if (gen !== this.generation) return;
      const err =
        this.unmatchedIdents > 0
          ? new LinkError(
              'protocol_mismatch',
              `${transport.description} answers HELLO with an IDENT that does not copy its nonce (${this.unmatchedIdents} such IDENTs; PROTOCOL.md, Handshake)`,
            )
          : this.handshakeJunk > 0
            ? new LinkError('not_a_ductbench_device', `${transport.description} sends data but not ductbench protocol v${PROTOCOL_VERSION} (${this.handshakeJunk} unreadable lines)`)
            : new LinkError(
                'handshake_timeout',
                `${transport.description} did not answer the handshake within ${this.opts.handshakeTimeoutMs} ms${this.bootValue ? ` (it booted, boot=${this.bootValue}, but answered no HELLO)` : ''}`,
              );
      this.fail(err);
    }, this.opts.handshakeTimeoutMs);
  }

  /** Sends HELLO with a fresh nonce; the answer must copy it. */
  private hello(): void {
    const nonce = this.nonceNext;
    this.nonceNext = (this.nonceNext + 1) % 65536;
    // Only this connection's recent HELLOs count; a bounded set, since a slow bootloader sees many retries.
    if (this.nonces.size >= 256) this.nonces.delete(this.nonces.values().next().value as number);
    this.nonces.add(nonce);
    this.send('HELLO', { proto: PROTOCOL_VERSION, host: 'ductbench', nonce });
  }

  private onLine(line: string): void {
    const r = decodeLine(line, 'd2h');
    if (!r.ok) {
      if (r.reason === 'empty') return;
      this.countBad(r.reason);
      if (this.statusValue === 'handshaking') this.handshakeJunk++;
      return;
    }
    this.onFrame(r as unknown as DeviceFrame);
  }

  private onFrame(frame: DeviceFrame): void {
    this.counters.linesOk++;
    if (this.rxSeq !== null) this.counters.seqGaps += seqGap(this.rxSeq, frame.seq);
    this.rxSeq = frame.seq;
    if (frame.tag === 'IDENT') {
      this.onIdent(frame);
      return;
    }
    if (this.statusValue !== 'ready') return;
    if (frame.tag === 'ACK' || frame.tag === 'NAK') this.settle(frame);
    this.emit('frame', frame);
  }

  /**
   * The handshake rule (PROTOCOL.md, Handshake): an IDENT whose nonce is one of this connection's HELLOs is an
   * answer; an IDENT with boot= is a restart, whatever came before it; anything else answers nobody. So a
   * boot IDENT after an auto-reset is never taken for an answer, and a second answer (to a repeated HELLO)
   * is never taken for a restart.
   */
  private onIdent(frame: FrameOf<'IDENT'>): void {
    const id = identityFromFrame(frame);
    if (id.protocol !== PROTOCOL_VERSION) {
      this.fail(new LinkError('protocol_mismatch', `device speaks protocol v${id.protocol}, ductbench speaks v${PROTOCOL_VERSION}; update the firmware or ductbench`));
      return;
    }
    const nonce = frame.fields.nonce;
    const answer = nonce !== undefined && this.nonces.has(nonce);
    const boot = frame.fields.boot ?? null;
    if (this.statusValue !== 'ready') {
      if (boot !== null) {
        // The board has just booted (often because opening the port pulsed its reset line): whatever HELLO
        // it missed while its bootloader ran, greet it now rather than at the next retry.
        this.bootValue = boot;
        this.hello();
        return;
      }
      if (!answer) {
        this.unmatchedIdents++;
        return;
      }
      const problem = heartbeatTimeoutProblem(id.heartbeatTimeoutMs);
      if (problem) {
        // A device that would keep a motor turning for longer than this after the host dies is not safe to drive.
        this.fail(new LinkError('protocol_mismatch', problem));
        return;
      }
      this.identityValue = id;
      this.emit('identity', id);
      if (this.helloTimer) clearInterval(this.helloTimer);
      if (this.handshakeTimer) clearTimeout(this.handshakeTimer);
      this.helloTimer = this.handshakeTimer = null;
      this.backoffMs = this.opts.reconnectInitialMs;
      this.lastError = null;
      this.budgetValue = lineBudget(id.channels, this.transport?.baudRate ?? DEFAULT_BAUD);
      this.setStatus('ready');
      this.heartbeatMs = this.opts.heartbeatIntervalMs ?? heartbeatIntervalFor(id.heartbeatTimeoutMs);
      this.heartbeatTimer = setInterval(() => this.send('HB', {}), this.heartbeatMs);
      this.send('HB', {});
      this.emit('ready', id);
      const b = this.budgetValue;
      if (!b.fits) {
        this.emit(
          'warning',
          `the declared rates (${frame.fields.caps.join(',')}) need up to ${b.bytesPerSecond} bytes/s, but ${this.transport?.baudRate ?? DEFAULT_BAUD} baud carries ${b.capacityPerSecond} (${Math.round(b.utilisation * 100)} %): telemetry will lag or be dropped (PROTOCOL.md, Telemetry)`,
        );
      }
      return;
    }
    if (answer) {
      // An answer to one of our HELLOs: to the one after a restart (the handshake is whole again), or a late
      // answer to a repeated HELLO of the first handshake. Neither is a restart.
      this.identityValue = id;
      this.emit('identity', id);
      if (this.rehandshake) this.endRehandshake();
      return;
    }
    // Anything else while ready is a restart (boot=, or a device that does not follow the nonce rule at all):
    // the controller is disarmed now and has forgotten the handshake, so it would refuse even CLEAR. Handshake
    // again on the same connection, repeating HELLO until it answers.
    this.identityValue = id;
    this.emit('identity', id);
    this.emit('frame', frame);
    this.rehandshake = true;
    this.hello();
    if (this.rehelloTimer) clearInterval(this.rehelloTimer);
    const started = Date.now();
    const gen = this.generation;
    this.rehelloTimer = setInterval(() => {
      if (gen !== this.generation || !this.rehandshake) return this.endRehandshake();
      if (Date.now() - started > this.opts.handshakeTimeoutMs) {
        this.endRehandshake();
        this.fail(new LinkError('handshake_timeout', `the device restarted and did not answer the handshake again within ${this.opts.handshakeTimeoutMs} ms`));
        return;
      }
      this.hello();
    }, this.opts.helloRetryMs);
  }

  private endRehandshake(): void {
    this.rehandshake = false;
    if (this.rehelloTimer) clearInterval(this.rehelloTimer);
    this.rehelloTimer = null;
  }

  private settle(frame: FrameOf<'ACK'> | FrameOf<'NAK'>): void {
    const p = this.pending.get(frame.fields.ref);
    if (!p) return;
    this.clearPending(frame.fields.ref);
    if (frame.tag === 'ACK') p.resolve();
    else p.reject(new CommandRefused(p.tag, frame.fields.why));
  }

  private clearPending(seq: number): void {
    const p = this.pending.get(seq);
    if (p) clearTimeout(p.timer);
    this.pending.delete(seq);
  }

  private countBad(reason: DecodeErrorReason): void {
    this.counters.linesBad[reason] = (this.counters.linesBad[reason] ?? 0) + 1;
  }

  private onTransportClose(gen: number, error: Error): void {
    if (gen !== this.generation) return;
    this.fail(new LinkError('disconnected', `lost ${this.source}: ${error.message}`));
  }

  private fail(error: LinkError): void {
    const t = this.transport;
    this.lastError = error;
    const retry = this.wanted && this.opts.reconnect && !this.opts.fatalKinds.includes(error.kind);
    let delay = 0;
    if (retry) {
      delay = this.backoffMs;
      this.backoffMs = Math.min(this.backoffMs * 2, this.opts.reconnectMaxMs);
      this.retryAt = Date.now() + delay;
      this.counters.reconnects++;
    } else {
      this.wanted = false;
      this.retryAt = null;
    }
    this.teardown(error, retry ? 'reconnecting' : 'closed');
    if (t) void t.close().catch(() => {});
    if (!retry) return;
    this.reconnectTimer = setTimeout(() => {
      this.reconnectTimer = null;
      void this.connect();
    }, delay);
  }

  private teardown(error: LinkError | null, next: LinkStatus): void {
    const wasReady = this.statusValue === 'ready' || this.statusValue === 'handshaking' || this.statusValue === 'opening';
    this.generation++;
    this.transport = null;
    this.writing = false;
    this.queue.length = 0;
    for (const timer of [this.heartbeatTimer, this.helloTimer, this.rehelloTimer]) if (timer) clearInterval(timer);
    this.rehelloTimer = null;
    this.rehandshake = false;
    if (this.handshakeTimer) clearTimeout(this.handshakeTimer);
    this.heartbeatTimer = this.helloTimer = this.handshakeTimer = null;
    for (const [seq, p] of this.pending) {
      clearTimeout(p.timer);
      p.reject(new CommandTimeout(p.tag, error ? error.message : 'link closed'));
      this.pending.delete(seq);
    }
    this.splitter.reset();
    this.setStatus(next);
    if (wasReady) this.emit('lost', { error });
  }

  private setStatus(s: LinkStatus): void {
    if (this.statusValue === s) return;
    this.statusValue = s;
    this.emit('status', this.view());
  }
}
