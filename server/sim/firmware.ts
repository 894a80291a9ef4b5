// The simulated microcontroller firmware: wire protocol v1 exactly as the real firmware speaks it, and the
// safety rules that make the microcontroller the final authority over the motor. It is an explicit state
// machine (mode: disarmed | armed | latched, plus whether a host has handshaken) with one transition function,
// `apply`, and a reason on every transition.
//
// Timing mirrors a real controller: bytes are split and decoded as they arrive (the receive interrupt);
// STOP and HB take effect right there, ahead of anything queued, while every other command waits in a short
// queue for the main loop (`tick`). The ESC output is owned here and nowhere else.

import { decodeLine, encodeLine, nextSeq, seqGap, withChecksum, type DecodeErrorReason } from '../../firmware-protocol/src/codec.js';
import { LineSplitter } from '../../firmware-protocol/src/lines.js';
import {
  MESSAGES,
  PROTOCOL_VERSION,
  type Channel,
  type DeviceMessageTag,
  type FaultCode,
  type FieldsOf,
  type HostFrame,
  type RefusalCode,
} from '../../firmware-protocol/src/messages.js';
import type { ChannelRate, SensorSample } from './sensors.js';

export type FwMode = 'disarmed' | 'armed' | 'latched';

export interface FirmwareConfig {
  name: string;
  version: string;
  caps: readonly ChannelRate[];
  /** Hard throttle ceiling: commands above it are refused, never clamped. */
  ceiling: number;
  heartbeatTimeoutMs: number;
  escRateHz: number;
  overcurrentA: number;
  overcurrentMs: number;
  /** 0 disables the brownout watch. */
  brownoutV: number;
  brownoutMs: number;
  /** 0 disables the load-cell watchdog. */
  sensorTimeoutMs: number;
  statPeriodMs: number;
  /** Commands the main loop takes from its queue per tick, and how many may wait. */
  commandsPerTick: number;
  queueCap: number;
}

/** Inputs of the transition function. */
export type FwInput =
  | { kind: 'boot'; fault: 'none' | 'reset' }
  | { kind: 'command'; frame: HostFrame }
  | { kind: 'heartbeat_lost' }
  | { kind: 'trip'; fault: 'overcurrent' | 'brownout' | 'sensor' };

export interface FwTransition {
  from: FwMode;
  to: FwMode;
  reason: string;
  /** Microseconds since the controller booted (not wrapped). */
  atUs: number;
}

export type FirmwareEvent =
  | ({ kind: 'transition' } & FwTransition)
  | { kind: 'bad_line'; reason: DecodeErrorReason | 'overlong' }
  | { kind: 'refused'; tag: string; seq: number; why: RefusalCode }
  | { kind: 'acked'; tag: string; seq: number }
  | { kind: 'fault'; fault: FaultCode };

export interface FirmwareStats {
  linesIn: number;
  badLines: number;
  badByReason: Record<string, number>;
  /** Host frames missing according to the host's sequence numbers. */
  hostSeqGaps: number;
  linesOut: number;
}

/**
 * Behaviour changes that stand in for buggy firmware: fault injection uses one, and the device checker's tests
 * run a "broken board" per flag to show the checker catches each. All false on a good board.
 */
export interface FirmwareBugs {
  /** Heartbeat loss is not tracked at all: hbok stays 1 and the output keeps running. */
  ignoreHeartbeat: boolean;
  /** IDENT answers HELLO without copying its nonce (PROTOCOL.md, Handshake). */
  noNonceEcho: boolean;
  /** ARM and THR are carried out before any handshake (Handshake: not_ready). */
  noHandshakeNeeded: boolean;
  /** A THR above the ceiling is clamped to it and acknowledged instead of refused (Safety: hard ceiling). */
  clampAboveCeiling: boolean;
  /** A THR above the ceiling while disarmed is refused as not_armed, not above_ceiling (Refusals and their order). */
  notArmedFirst: boolean;
  /** A new fault replaces the latched one (Safety: fault latch). */
  latchReplaced: boolean;
  /** STOP disarms but latches nothing (Safety: STOP first). */
  stopNoLatch: boolean;
  /** The heartbeat time-out applied is three times the one announced (Heartbeat). */
  lateHeartbeatCut: boolean;
  /** STAT only every second when nothing changes (Telemetry: STAT at least every 200 ms). */
  slowStat: boolean;
  /** Numbers sent without their declared decimals, e.g. out=0.3 (Framing: senders write the declared decimals). */
  shortNumbers: boolean;
}

export const NO_BUGS: Readonly<FirmwareBugs> = Object.freeze({
  ignoreHeartbeat: false,
  noNonceEcho: false,
  noHandshakeNeeded: false,
  clampAboveCeiling: false,
  notArmedFirst: false,
  latchReplaced: false,
  stopNoLatch: false,
  lateHeartbeatCut: false,
  slowStat: false,
  shortNumbers: false,
});
export type FirmwareBug = keyof FirmwareBugs;

const TEL_KEY: Record<Channel, 'thrust' | 'v' | 'i' | 'rpm' | 'temp' | 'torque'> = {
  thrust: 'thrust',
  voltage: 'v',
  current: 'i',
  rpm: 'rpm',
  temp: 'temp',
  torque: 'torque',
};

/** Acknowledged commands carried out in every state: before the handshake and while latched. */
const ALWAYS_CARRIED_OUT = new Set<string>(['STOP', 'DISARM', 'BYE']);

const DEFAULT_TARE_SAMPLES = 16;
const U32 = 4294967296;

export class Firmware {
  // ---- the state machine
  private _mode: FwMode = 'disarmed';
  private _handshaken = false;
  private _fault: FaultCode = 'none';
  private _commanded = 0;
  private _output = 0;
  private _hbOk = false;
  private lastHbUs = 0;
  /** Heartbeats counted, and the longest gap between two of them, since the window was last reset. */
  private hbWindow = { count: 0, maxGapUs: 0, lastUs: null as number | null };

  // ---- plumbing
  private nowUs = 0;
  private bootUs = 0;
  private txSeq: number;
  private lastHostSeq: number | null = null;
  private readonly queue: HostFrame[] = [];
  private readonly splitter: LineSplitter;
  private readonly pending = new Map<Channel, number>();
  private readonly framePeriodUs: number;
  private nextFrameUs = 0;
  private nextStatUs = 0;
  private lastStatSig = '';
  private tare: { remaining: number; n: number; sum: number } | null = null;
  private tareOffset = 0;
  private overSinceUs: number | null = null;
  private underSinceUs: number | null = null;
  private lastThrustUs = 0;
  private lastBadLogUs = -Infinity;
  private readonly hasThrust: boolean;

  readonly stats: FirmwareStats = { linesIn: 0, badLines: 0, badByReason: {}, hostSeqGaps: 0, linesOut: 0 };
  readonly transitions: FwTransition[] = [];
  readonly bugs: FirmwareBugs = { ...NO_BUGS };
  onEvent: ((e: FirmwareEvent) => void) | null = null;

  constructor(
    private readonly cfg: FirmwareConfig,
    private readonly emit: (line: string) => void,
    private readonly clockOffsetUs: number,
    private readonly initialTxSeq = 0,
  ) {
    this.txSeq = initialTxSeq;
    const maxRate = Math.max(0, ...cfg.caps.map((c) => c.rateHz));
    this.framePeriodUs = 1e6 / (maxRate > 0 ? maxRate : 50);
    this.hasThrust = cfg.caps.some((c) => c.channel === 'thrust');
    this.splitter = new LineSplitter(
      (line) => this.onLine(line),
      () => this.badLine('overlong'),
    );
  }

  get mode(): FwMode {
    return this._mode;
  }
  get armed(): boolean {
    return this._mode === 'armed';
  }
  get handshaken(): boolean {
    return this._handshaken;
  }
  get fault(): FaultCode {
    return this._fault;
  }
  /** Throttle the ESC is receiving now. */
  get output(): number {
    return this._output;
  }
  get commanded(): number {
    return this._commanded;
  }
  get hbOk(): boolean {
    return this._hbOk;
  }
  get taring(): boolean {
    return this.tare !== null;
  }
  /** The device clock as sent in TEL (microseconds, wrapping at 2^32). */
  get deviceClockUs(): number {
    return (((this.clockOffsetUs + this.nowUs - this.bootUs) % U32) + U32) % U32;
  }
  get queued(): number {
    return this.queue.length;
  }

  /** (Re)starts the controller at `nowUs`: RAM is fresh, the output stops, IDENT and STAT go out. */
  boot(nowUs: number, fault: 'none' | 'reset'): void {
    this.nowUs = nowUs;
    this.bootUs = nowUs;
    this.apply({ kind: 'boot', fault });
  }

  /** Bytes from the host (the receive interrupt). */
  receive(chunk: Buffer | string, nowUs: number): void {
    this.nowUs = Math.max(this.nowUs, nowUs);
    this.splitter.push(chunk);
    this.statIfChanged();
  }

  /**
   * One pass of the main loop at `nowUs`: queued commands, new sensor samples, watchdogs, STAT and TEL.
   */
  tick(nowUs: number, samples: readonly SensorSample[]): void {
    this.nowUs = nowUs;
    for (let k = 0; k < this.cfg.commandsPerTick && this.queue.length > 0; k++) {
      this.apply({ kind: 'command', frame: this.queue.shift()! });
    }
    for (const s of samples) this.onSample(s);
    this.watchdogs();
    this.statIfChanged();
    if (nowUs >= this.nextStatUs) this.sendStat();
    if (nowUs >= this.nextFrameUs) {
      this.sendTel();
      while (this.nextFrameUs <= nowUs) this.nextFrameUs += this.framePeriodUs;
    }
  }

  // ------------------------------------------------------------------ the transition function

  private apply(input: FwInput): void {
    switch (input.kind) {
      case 'boot': {
        this.cut();
        this._handshaken = false;
        this._hbOk = false;
        this.queue.length = 0;
        this.pending.clear();
        this.tare = null;
        this.tareOffset = 0;
        this.overSinceUs = null;
        this.underSinceUs = null;
        this.lastThrustUs = this.nowUs;
        this.lastHostSeq = null;
        this.txSeq = this.initialTxSeq;
        this._fault = input.fault;
        this.nextFrameUs = this.nowUs + this.framePeriodUs;
        // A restart mid-run is latched: a host that did not see it must not carry on as if nothing happened.
        this.enter(input.fault === 'none' ? 'disarmed' : 'latched', input.fault === 'none' ? 'power-on boot' : 'controller restarted');
        this.sendIdent({ boot: input.fault === 'none' ? 'power' : 'reset' });
        this.sendStat();
        if (input.fault !== 'none') this.event({ kind: 'fault', fault: input.fault });
        return;
      }
      case 'heartbeat_lost': {
        this._hbOk = false;
        this.cut();
        this.latch('heartbeat', `no heartbeat for over ${this.cfg.heartbeatTimeoutMs} ms`);
        return;
      }
      case 'trip': {
        this.cut();
        this.latch(input.fault, `firmware trip: ${input.fault}`);
        this.log('error', `trip ${input.fault}: output cut`);
        return;
      }
      case 'command':
        this.command(input.frame);
        return;
    }
  }

  private command(f: HostFrame): void {
    switch (f.tag) {
      case 'HELLO': {
        this.sendIdent(f.fields.nonce !== undefined && !this.bugs.noNonceEcho ? { nonce: f.fields.nonce } : {});
        // A new handshake is a new host session: whatever the old one had running stops.
        if (this._mode === 'armed') {
          this.cut();
          this.enter('disarmed', f.fields.proto === PROTOCOL_VERSION ? 'new handshake while armed' : 'handshake with another protocol version');
        }
        // A host speaking another version gets IDENT (so it can say what is wrong) and not_ready after it.
        this._handshaken = f.fields.proto === PROTOCOL_VERSION;
        this.lastHbUs = this.nowUs;
        this._hbOk = this._handshaken;
        this.sendStat();
        return;
      }
      case 'HB':
        if (this._handshaken) {
          const w = this.hbWindow;
          if (w.lastUs !== null) w.maxGapUs = Math.max(w.maxGapUs, this.nowUs - w.lastUs);
          w.lastUs = this.nowUs;
          w.count++;
          this.lastHbUs = this.nowUs;
          this._hbOk = true;
        }
        return;
      case 'STATUS':
        this.sendStat();
        return;
      default:
        break;
    }
    // Everything below is acknowledged. Refusals in the order PROTOCOL.md gives: not_ready, then latched, then
    // the command's own (for THR above_ceiling before not_armed).
    const always = ALWAYS_CARRIED_OUT.has(f.tag);
    if (!always && !this._handshaken && !this.bugs.noHandshakeNeeded) return this.nak(f, 'not_ready');
    if (!always && f.tag !== 'CLEAR' && this._mode === 'latched') return this.nak(f, 'latched');
    switch (f.tag) {
      case 'ARM':
        if (this._commanded !== 0) return this.nak(f, 'throttle_not_zero');
        this.enter('armed', 'armed by host');
        return this.ack(f);
      case 'DISARM':
        // Always carried out (messages.ts); while latched it changes nothing but is still acknowledged.
        this.cut();
        if (this._mode === 'armed') this.enter('disarmed', 'disarmed by host');
        return this.ack(f);
      case 'THR': {
        let v = f.fields.v;
        if (this.bugs.notArmedFirst && this._mode !== 'armed' && v !== 0) return this.nak(f, 'not_armed');
        if (v > this.cfg.ceiling) {
          if (!this.bugs.clampAboveCeiling) return this.nak(f, 'above_ceiling');
          v = this.cfg.ceiling;
        }
        if (this._mode !== 'armed') {
          if (v !== 0) return this.nak(f, 'not_armed');
          this._commanded = 0;
          return this.ack(f);
        }
        this._commanded = v;
        this._output = v;
        return this.ack(f);
      }
      case 'STOP':
        this.stop(f.fields.why ?? 'estop');
        return this.ack(f);
      case 'BYE':
        // The host leaves: nothing may keep running, and nobody is left to send heartbeats, so stop watching
        // them (a latch of heartbeat loss after a clean exit would tell the next host nothing true).
        this.cut();
        if (this._mode === 'armed') this.enter('disarmed', 'host ended its session');
        this._handshaken = false;
        this._hbOk = false;
        return this.ack(f);
      case 'CLEAR':
        if (this._mode === 'latched') {
          const was = this._fault;
          this._fault = 'none';
          // A fresh heartbeat window: the host gets the full time-out to show it is there.
          this.lastHbUs = this.nowUs;
          if (!this.bugs.ignoreHeartbeat) this._hbOk = true;
          this.overSinceUs = null;
          this.underSinceUs = null;
          this.lastThrustUs = Math.max(this.lastThrustUs, this.nowUs);
          this.enter('disarmed', `fault ${was} cleared by host`);
        }
        return this.ack(f);
      case 'TARE':
        // The protocol has no "armed" refusal; busy is the nearest (the bench is in use).
        if (this._mode === 'armed' || this.tare) return this.nak(f, 'busy');
        this.tare = { remaining: f.fields.n ?? DEFAULT_TARE_SAMPLES, n: 0, sum: 0 };
        return this.ack(f);
      case 'CALSET':
        return this.nak(f, 'unsupported');
    }
  }

  private stop(why: 'estop' | 'host_trip'): void {
    this.cut();
    if (this.bugs.stopNoLatch) {
      if (this._mode === 'armed') this.enter('disarmed', 'emergency stop (not latched)');
      return;
    }
    this.latch(why, why === 'estop' ? 'emergency stop' : 'host limit tripped');
  }

  /** Output to zero, throttle command forgotten. Called before any state change so the cut comes first. */
  private cut(): void {
    this._output = 0;
    this._commanded = 0;
  }

  /** Latches `fault` unless one is already latched: the first cause is the one worth reporting. */
  private latch(fault: FaultCode, reason: string): void {
    if (this._fault === 'none' || this.bugs.latchReplaced) {
      this._fault = fault;
      this.event({ kind: 'fault', fault });
    }
    this.enter('latched', reason);
  }

  private enter(to: FwMode, reason: string): void {
    const from = this._mode;
    this._mode = to;
    if (from === to) return;
    const t: FwTransition = { from, to, reason, atUs: this.nowUs - this.bootUs };
    this.transitions.push(t);
    if (this.transitions.length > 200) this.transitions.shift();
    this.event({ kind: 'transition', ...t });
  }

  // ------------------------------------------------------------------ receive path

  /**
   * How the host's heartbeat looked from here since the last reset: how many arrived and the longest gap
   * between two (device time; with the real-time clock, wall time to within one main-loop tick).
   */
  heartbeatWindow(reset = false): { count: number; maxGapMs: number } {
    const w = this.hbWindow;
    const out = { count: w.count, maxGapMs: w.maxGapUs / 1000 };
    if (reset) this.hbWindow = { count: 0, maxGapUs: 0, lastUs: w.lastUs };
    return out;
  }

  private onLine(line: string): void {
    const r = decodeLine(line, 'h2d');
    if (!r.ok) {
      this.badLine(r.reason);
      return;
    }
    this.stats.linesIn++;
    if (this.lastHostSeq !== null) this.stats.hostSeqGaps += seqGap(this.lastHostSeq, r.seq);
    this.lastHostSeq = r.seq;
    const frame = r as HostFrame;
    if (frame.tag === 'STOP' || frame.tag === 'HB') {
      // Handled in the receive path, ahead of the queue: a STOP behind a burst of THR must not wait for it.
      this.apply({ kind: 'command', frame });
      return;
    }
    if (this.queue.length >= this.cfg.queueCap) {
      if (MESSAGES[frame.tag].acked) this.nak(frame, 'busy');
      return;
    }
    this.queue.push(frame);
  }

  private badLine(reason: DecodeErrorReason | 'overlong'): void {
    this.stats.badLines++;
    this.stats.badByReason[reason] = (this.stats.badByReason[reason] ?? 0) + 1;
    this.event({ kind: 'bad_line', reason });
    // At most one warning a second: a noisy cable must not turn into a flood in the other direction.
    if (this.nowUs - this.lastBadLogUs >= 1e6) {
      this.lastBadLogUs = this.nowUs;
      this.log('warn', `bad host line: ${reason} (${this.stats.badLines} so far)`);
    }
  }

  // ------------------------------------------------------------------ sensors and watchdogs

  private onSample(s: SensorSample): void {
    let v = s.value;
    if (s.channel === 'thrust') {
      this.lastThrustUs = this.nowUs;
      if (this.tare) {
        this.tare.sum += v;
        this.tare.n++;
        if (--this.tare.remaining <= 0) {
          this.tareOffset = this.tare.sum / this.tare.n;
          this.log('info', `tare done over ${this.tare.n} samples`);
          this.tare = null;
        }
      }
      v -= this.tareOffset;
    } else if (s.channel === 'current') {
      if (v > this.cfg.overcurrentA) {
        this.overSinceUs ??= this.nowUs;
        if (this.nowUs - this.overSinceUs >= this.cfg.overcurrentMs * 1000 && this._mode !== 'latched') {
          this.apply({ kind: 'trip', fault: 'overcurrent' });
        }
      } else this.overSinceUs = null;
    } else if (s.channel === 'voltage' && this.cfg.brownoutV > 0) {
      if (v < this.cfg.brownoutV) {
        this.underSinceUs ??= this.nowUs;
        if (this.nowUs - this.underSinceUs >= this.cfg.brownoutMs * 1000 && this._mode !== 'latched') {
          this.apply({ kind: 'trip', fault: 'brownout' });
        }
      } else this.underSinceUs = null;
    }
    this.pending.set(s.channel, v);
  }

  private watchdogs(): void {
    const timeoutUs = this.cfg.heartbeatTimeoutMs * 1000 * (this.bugs.lateHeartbeatCut ? 3 : 1);
    if (this._handshaken && this._hbOk && !this.bugs.ignoreHeartbeat && this.nowUs - this.lastHbUs > timeoutUs) {
      this.apply({ kind: 'heartbeat_lost' });
    }
    if (this.hasThrust && this.cfg.sensorTimeoutMs > 0 && this._mode !== 'latched' && this.nowUs - this.lastThrustUs > this.cfg.sensorTimeoutMs * 1000) {
      this.apply({ kind: 'trip', fault: 'sensor' });
    }
  }

  // ------------------------------------------------------------------ transmit path

  private send<M extends DeviceMessageTag>(tag: M, fields: FieldsOf<M>): void {
    let line = encodeLine(tag, this.txSeq, fields);
    if (this.bugs.shortNumbers && (tag === 'TEL' || tag === 'STAT')) {
      // Trailing zeros of every decimal dropped ("0.300" -> "0.3", "0.000" -> "0"), then signed again.
      const body = line.slice(0, line.lastIndexOf('*')).replace(/=(-?\d+)\.(\d*?)0+(?=[ ]|$)/g, (_m, i: string, d: string) => `=${i}${d ? '.' + d : ''}`);
      line = withChecksum(body) + '\n';
    }
    this.txSeq = nextSeq(this.txSeq);
    this.stats.linesOut++;
    this.emit(line);
  }

  private ack(f: HostFrame): void {
    this.send('ACK', { ref: f.seq });
    this.event({ kind: 'acked', tag: f.tag, seq: f.seq });
  }

  private nak(f: HostFrame, why: RefusalCode): void {
    this.send('NAK', { ref: f.seq, why });
    this.event({ kind: 'refused', tag: f.tag, seq: f.seq, why });
  }

  private log(level: 'debug' | 'info' | 'warn' | 'error', msg: string): void {
    this.send('LOG', { level, msg: msg.replace(/[^\x20-\x29\x2b-\x7e]/g, '?') });
  }

  private sendIdent(extra: { nonce?: number; boot?: 'power' | 'reset' }): void {
    this.send('IDENT', {
      proto: PROTOCOL_VERSION,
      fw: this.cfg.name,
      fwver: this.cfg.version,
      caps: this.cfg.caps.map((c) => `${c.channel}@${formatRate(c.rateHz)}`),
      thrmax: this.cfg.ceiling,
      hb: this.cfg.heartbeatTimeoutMs,
      escrate: this.cfg.escRateHz,
      ...extra,
    });
  }

  private statSig(): string {
    return `${this.armed ? 1 : 0}|${this._output.toFixed(3)}|${this._fault}|${this._hbOk ? 1 : 0}`;
  }

  private sendStat(): void {
    this.lastStatSig = this.statSig();
    this.nextStatUs = this.nowUs + (this.bugs.slowStat ? 1000 : this.cfg.statPeriodMs) * 1000;
    this.send('STAT', { armed: this.armed, out: this._output, fault: this._fault, hbok: this._hbOk });
  }

  private statIfChanged(): void {
    if (this.statSig() !== this.lastStatSig) this.sendStat();
  }

  private sendTel(): void {
    const fields: FieldsOf<'TEL'> = { t: this.deviceClockUs, out: this._output };
    const rec = fields as Record<string, number>;
    for (const [ch, v] of this.pending) rec[TEL_KEY[ch]] = saturate(ch, v);
    this.pending.clear();
    this.send('TEL', fields);
  }

  private event(e: FirmwareEvent): void {
    this.onEvent?.(e);
  }
}

/** Rates in caps are integers where they can be ("thrust@80"), else up to three decimals. */
function formatRate(hz: number): string {
  return Number.isInteger(hz) ? String(hz) : String(Number(hz.toFixed(3)));
}

/** A converter saturates at its range rather than sending a value the protocol forbids. */
function saturate(ch: Channel, v: number): number {
  const key = TEL_KEY[ch];
  const spec = MESSAGES.TEL.fields.find((f) => f.key === key)!;
  const lo = 'min' in spec ? spec.min : -Infinity;
  const hi = 'max' in spec ? spec.max : Infinity;
  return Math.min(hi, Math.max(lo, v));
}
