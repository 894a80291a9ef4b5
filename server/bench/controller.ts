// The one place that owns the throttle. Every surface (dashboard, CLI, sequence runner, interlocks) asks the
// controller; the controller asks the link. It holds the bench state machine and turns device status into
// transitions.
//
// Stop and trip are synchronous and write the cut before doing anything else (no await before the write):
// the cut must not wait behind a promise chain, a log line or a broadcast.

import type { FaultCode, FrameOf } from '../../firmware-protocol/src/messages.js';
import type { BenchEvent, BenchState, BenchView, EventLevel } from '../api/messages.js';
import { RECONCILE_TIMEOUT_MS } from '../../firmware-protocol/src/host-rules.js';
import { CommandRefused, CommandTimeout, type DeviceLink } from '../link/link.js';
import { TypedEmitter } from '../util/emitter.js';
import { mayTurn, nextState, type BenchInput, type Transition } from './state.js';

/** A new stop within this long of an unacknowledged one is not written again (ms). */
export const STOP_COALESCE_MS = 50;

/** Period of throttle ramp steps (ms). */
export const RAMP_TICK_MS = 20;

export class ControlError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'ControlError';
  }
}

export interface TripRecord {
  rule: string;
  value: number;
  limit: number;
  detail: string;
  /** Host time the offending line arrived (ms, performance.now() base) and the cut was written. */
  arrivedAt: number;
  cutWrittenAt: number | null;
}

export interface ControllerEvents {
  bench: BenchView;
  transition: Transition & { t: number };
  event: BenchEvent;
  trip: TripRecord;
}

export class BenchController extends TypedEmitter<ControllerEvents> {
  private stateValue: BenchState = 'disconnected';
  private reasonValue = 'not connected yet';
  private since = Date.now();
  private armed = false;
  private output: number | null = null;
  private fault: FaultCode = 'none';
  private throttleCommand = 0;
  /** Bumped by every new throttle request, stop and trip: a running ramp sees it and gives up. */
  private rampId = 0;
  private lastStop: { at: number; acked: boolean } | null = null;
  /** Fastest upward throttle change, fraction per second (the throttle_slew limit). Downward is never limited. */
  maxSlewPerS = 1.0;
  /** The rig's own throttle ceiling (limits.max_throttle), applied with the device's. */
  maxThrottle = 1.0;

  constructor(private readonly link: DeviceLink) {
    super();
    link.on('status', (v) => {
      if (v.status === 'opening') this.apply({ kind: 'link_opening', source: v.source });
    });
    link.on('ready', (id) => {
      this.armed = false;
      this.output = null;
      this.fault = 'none';
      this.throttleCommand = 0;
      this.apply({ kind: 'link_ready', firmware: `${id.firmware} ${id.firmwareVersion}` });
      link.send('STATUS', {});
    });
    link.on('warning', (text) => this.log('warn', 'link', text));
    link.on('lost', ({ error }) => {
      this.armed = false;
      this.output = null;
      this.throttleCommand = 0;
      this.apply({ kind: 'link_lost', why: error ? error.message : 'link closed' });
    });
    link.on('frame', (f) => {
      if (f.tag === 'STAT') this.onStatus(f);
      else if (f.tag === 'IDENT') {
        // The controller restarted under us: whatever it was doing, it is disarmed now.
        this.log('warn', 'device', 'device restarted (new identity while connected): it is disarmed');
        this.throttleCommand = 0;
      } else if (f.tag === 'LOG') this.log(f.fields.level === 'error' ? 'error' : f.fields.level === 'warn' ? 'warn' : 'info', 'device_log', f.fields.msg);
    });
  }

  get state(): BenchState {
    return this.stateValue;
  }

  view(): BenchView {
    return {
      state: this.stateValue,
      reason: this.reasonValue,
      since: this.since,
      armed: this.armed,
      throttleCommand: this.throttleCommand,
      throttleOutput: this.output,
      fault: this.fault,
      ceiling: this.link.identity?.throttleCeiling ?? 0,
    };
  }

  async arm(): Promise<void> {
    if (this.stateValue !== 'safe') throw new ControlError(`cannot arm while ${this.stateValue}`);
    this.throttleCommand = 0;
    await this.device('ARM', {});
  }

  async disarm(): Promise<void> {
    this.throttleCommand = 0;
    if (!this.link.isReady) return;
    await this.device('DISARM', {});
  }

  /**
   * Sets the throttle (0..1). Refused, never clamped, above the device's ceiling or when not armed. Upward
   * changes faster than maxSlewPerS are ramped in RAMP_TICK_MS steps (the throttle_slew limit); downward
   * changes go at once. Resolves when the target is reached; a newer request, a stop or a trip ends a ramp.
   */
  async setThrottle(value: number): Promise<void> {
    if (!Number.isFinite(value) || value < 0 || value > 1) throw new ControlError(`throttle ${value} outside 0..1`);
    if (!mayTurn(this.stateValue)) throw new ControlError(`cannot set throttle while ${this.stateValue}`);
    const ceiling = this.link.identity?.throttleCeiling ?? 0;
    if (value > ceiling) throw new ControlError(`throttle ${value} is above the device ceiling ${ceiling}`);
    if (value > this.maxThrottle) throw new ControlError(`throttle ${value} is above the rig's max_throttle ${this.maxThrottle}`);
    const ramp = ++this.rampId;
    const step = this.maxSlewPerS * (RAMP_TICK_MS / 1000);
    let cur = this.throttleCommand;
    if (value <= cur + step) {
      this.throttleCommand = value;
      await this.throttle(value);
      return;
    }
    while (cur < value) {
      const next = Math.min(value, Math.round((cur + step) * 1e4) / 1e4);
      this.throttleCommand = next;
      await this.throttle(next);
      cur = next;
      if (cur >= value) break;
      await new Promise((r) => setTimeout(r, RAMP_TICK_MS));
      if (ramp !== this.rampId) throw new ControlError('throttle ramp ended by a newer command, a stop or a trip');
      if (!mayTurn(this.stateValue)) throw new ControlError(`throttle ramp ended: bench is ${this.stateValue}`);
    }
  }

  /**
   * Emergency stop from any surface. Writes STOP first, then records. Safe to call in any state and as often
   * as wanted; with no device connected there is nothing to cut and it says so.
   */
  stop(source: string): boolean {
    // A flood of stops (a stuck key, a hostile page) must not flood the serial line: while the last STOP is
    // fresh and unacknowledged, another one changes nothing.
    const now = performance.now();
    if (this.lastStop && !this.lastStop.acked && now - this.lastStop.at < STOP_COALESCE_MS) return true;
    const sent = this.link.sendUrgent('estop');
    if (sent) {
      const rec = { at: now, acked: false };
      this.lastStop = rec;
      sent.acked.then(
        () => (rec.acked = true),
        () => {},
      );
    }
    this.throttleCommand = 0;
    this.rampId++;
    this.log('warn', 'stop', sent ? `emergency stop from ${source}: cut sent` : `emergency stop from ${source}: no device connected`);
    this.emit('bench', this.view());
    return sent !== null;
  }

  /**
   * A host limit tripped: cut first (STOP why=host_trip straight to the transport), then change state and tell
   * everyone. `arrivedAt` is when the offending line arrived (performance.now()), for the latency record.
   */
  trip(rule: string, value: number, limit: number, detail: string, arrivedAt: number): TripRecord {
    const sent = this.link.sendUrgent('host_trip');
    const cutWrittenAt = sent ? performance.now() : null;
    this.throttleCommand = 0;
    this.rampId++;
    const record: TripRecord = { rule, value, limit, detail, arrivedAt, cutWrittenAt };
    this.apply({ kind: 'host_trip', rule, detail });
    this.log('error', 'trip', `${rule} tripped: ${detail}`);
    this.emit('trip', record);
    return record;
  }

  /** Operator acknowledges a trip: clear the device latch, then leave tripped (disarmed). */
  async acknowledge(): Promise<void> {
    if (this.stateValue !== 'tripped') throw new ControlError('nothing to acknowledge: not tripped');
    if (this.link.isReady && this.fault !== 'none') {
      await this.device('CLEAR', {});
      this.fault = 'none';
    }
    this.apply({ kind: 'acknowledge', linkReady: this.link.isReady, deviceFault: this.fault });
  }

  async tare(): Promise<void> {
    if (this.stateValue !== 'safe') throw new ControlError(`tare only while safe (disarmed), not ${this.stateValue}`);
    await this.device('TARE', {});
  }

  /**
   * THR, reconciled: when its ACK is lost (the line or its answer corrupted on the way), the board's next STAT
   * says whether it was carried out. Armed at the value asked for (to STAT's 3 decimals): taken, go on.
   * Anything else: a ControlError that says "no acknowledgement", and the caller cuts.
   */
  private async throttle(v: number): Promise<void> {
    try {
      await this.link.command('THR', { v });
    } catch (err) {
      if (!(err instanceof CommandTimeout && err.noAck && this.link.isReady)) return this.rethrow('THR', err);
      const stat = await this.nextStatus(RECONCILE_TIMEOUT_MS);
      if (stat && stat.fields.armed && Math.abs(stat.fields.out - v) <= 0.0005 + 1e-9) {
        this.log('warn', 'command', `THR v=${v.toFixed(4)}: no acknowledgement, but the board's status shows out=${stat.fields.out.toFixed(3)}: it was carried out`);
        return;
      }
      const seen = stat ? `the board's status shows armed=${stat.fields.armed ? 1 : 0} out=${stat.fields.out.toFixed(3)}` : `no status from the board within ${RECONCILE_TIMEOUT_MS} ms`;
      throw new ControlError(`THR v=${v.toFixed(4)}: ${err.message.replace(/^THR: /, '')}, and ${seen}`);
    }
  }

  /** Asks for a STAT and resolves with the next one to arrive, or null after timeoutMs. */
  private nextStatus(timeoutMs: number): Promise<FrameOf<'STAT'> | null> {
    return new Promise((resolve) => {
      const timer = setTimeout(() => {
        off();
        resolve(null);
      }, timeoutMs);
      const off = this.link.on('frame', (f) => {
        if (f.tag !== 'STAT') return;
        clearTimeout(timer);
        off();
        resolve(f);
      });
      this.link.send('STATUS', {});
    });
  }

  private rethrow(tag: string, err: unknown): never {
    if (err instanceof CommandRefused) throw new ControlError(`device refused ${tag}: ${err.why.replace(/_/g, ' ')}`);
    throw new ControlError((err as Error).message);
  }

  private async device(tag: 'ARM' | 'DISARM' | 'THR' | 'CLEAR' | 'TARE', fields: Record<string, number>): Promise<void> {
    try {
      await this.link.command(tag, fields as never);
    } catch (err) {
      if (err instanceof CommandRefused) throw new ControlError(`device refused ${tag}: ${err.why.replace(/_/g, ' ')}`);
      throw new ControlError((err as Error).message);
    }
  }

  private onStatus(f: FrameOf<'STAT'>): void {
    const changed = f.fields.armed !== this.armed || f.fields.out !== this.output || f.fields.fault !== this.fault;
    this.armed = f.fields.armed;
    this.output = f.fields.out;
    this.fault = f.fields.fault;
    if (!this.armed) this.throttleCommand = 0;
    const moved = this.apply({ kind: 'device_status', armed: f.fields.armed, output: f.fields.out, fault: f.fields.fault });
    if (changed && !moved) this.emit('bench', this.view());
  }

  private apply(input: BenchInput): boolean {
    const tr = nextState(this.stateValue, input);
    if (!tr) return false;
    this.stateValue = tr.to;
    this.reasonValue = tr.reason;
    this.since = Date.now();
    this.emit('transition', { ...tr, t: this.since });
    this.log(tr.to === 'tripped' ? 'error' : 'info', 'state', `${tr.from} -> ${tr.to}: ${tr.reason}`);
    this.emit('bench', this.view());
    return true;
  }

  private log(level: EventLevel, kind: string, text: string): void {
    this.emit('event', { t: Date.now(), level, kind, text });
  }
}
