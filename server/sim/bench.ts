// The virtual bench: the simulated firmware (firmware.ts) wired to its sensors (sensors.ts) and the physical
// truth (truth.ts), on a device clock that tests step by hand (`advance(ms)`) or that follows real time
// (`startRealtime()`). Bytes from the host go in through `receive`; bytes to the host come out through the
// output callback, one chunk per main-loop tick (as a USB serial adapter would batch them). Everything random
// comes from one seeded generator, so a seed and a sequence of inputs reproduce a run exactly.

import { performance } from 'node:perf_hooks';
import type { FaultCode } from '../../firmware-protocol/src/messages.js';
import type { RigSpec } from '../model/rig-types.js';
import { DEFAULT_OPEN_RIG } from './default-rigs.js';
import type { FaultOptions, InjectedFault, InjectedFaultKind } from './faults.js';
import { Firmware, type FirmwareBugs, type FirmwareEvent, type FirmwareStats, type FwMode, type FwTransition } from './firmware.js';
import { Prng } from './prng.js';
import { SensorBank } from './sensors.js';
import { parseSimConstants, type SimConstants } from './sim-constants.js';
import { TruthModel, type DuctFactors, type TruthState } from './truth.js';

/** The main loop and the physics both run on this step, in microseconds. */
export const TICK_US = 500;

/** Longest stretch one real-time timer callback may simulate; a stalled event loop beyond it loses device time. */
// A stall of the process the bench shares (a loaded test machine, a GC pause) is not the host going
// silent: simulating it as silence would latch heartbeat loss in a bench whose host is fine. Cap the catch-up
// well below the 300 ms time-out; a host that really stops sending still trips it over following ticks.
const MAX_REALTIME_CATCHUP_MS = 100;
/** Longest pause between stopRealtime and startRealtime that the device lives through. */
const MAX_PAUSE_CATCHUP_MS = 10000;

export const SIM_FIRMWARE_NAME = 'vbench';
export const SIM_FIRMWARE_VERSION = '1.0.0';

export interface VirtualBenchOptions {
  /** Rig to simulate (its `sim` section holds the truth constants); the open default rig when left out. */
  rig?: RigSpec;
  /** Seed for all noise; default 1. */
  seed?: number;
  /** Device clock at boot, in microseconds (wraps at 2^32): set near 2^32 to exercise the wrap. */
  clockOffsetUs?: number;
  /** First device-to-host sequence number (0 on a real boot): set near 65535 to exercise the wrap. */
  initialTxSeq?: number;
  /** Bytes to the host. Can also be set later with setOutput. */
  output?: (chunk: string) => void;
  /** Real-time timer period in milliseconds (default 5). */
  realtimeIntervalMs?: number;
}

/** What tests may read; a copy, so holding it does not pin the bench. */
export interface BenchSnapshot {
  mode: FwMode;
  armed: boolean;
  handshaken: boolean;
  /** Throttle the ESC receives now. */
  output: number;
  /** Throttle the host last set (0 after any cut). */
  commanded: number;
  fault: FaultCode;
  hbOk: boolean;
  taring: boolean;
  /** Device clock as sent in TEL (wraps). */
  deviceClockUs: number;
  /** Simulated time since the bench was created, in milliseconds (never wraps, survives a reset). */
  simTimeMs: number;
  unplugged: boolean;
  /** True while an injected reset holds the controller down. */
  offline: boolean;
  activeFaults: InjectedFaultKind[];
}

type BenchLinkListener = (plugged: boolean) => void;

interface FaultEntry {
  kind: InjectedFaultKind;
  startUs: number;
  endUs: number;
  active: boolean;
  ended: boolean;
  start: () => void;
  stop: () => void;
}

export class VirtualBench {
  /** What is on the virtual stand; replaced by remount() (the board and its truth constants stay). */
  rig: RigSpec;
  readonly sim: SimConstants;
  private readonly rng: Prng;
  private truthModel: TruthModel;
  private readonly sensors: SensorBank;
  private readonly fw: Firmware;
  private output: ((chunk: string) => void) | null;
  private outBuf: string[] = [];
  private simUs = 0;
  private carryUs = 0;
  private silent = false;
  private timer: ReturnType<typeof setInterval> | null = null;
  private pausedAtMs: number | null = null;
  private readonly intervalMs: number;
  private unplugCount = 0;
  private offlineUntilUs: number | null = null;
  private readonly faults: FaultEntry[] = [];
  private garble: { d2h: number; h2d: number } = { d2h: 0, h2d: 0 };
  private readonly linkListeners = new Set<BenchLinkListener>();
  private readonly eventListeners = new Set<(e: FirmwareEvent) => void>();
  private readonly errorListeners = new Set<(e: Error) => void>();
  private dead: Error | null = null;

  constructor(opts: VirtualBenchOptions = {}) {
    this.rig = opts.rig ?? DEFAULT_OPEN_RIG;
    this.sim = parseSimConstants(this.rig.sim, 'rig.sim');
    this.rng = new Prng(opts.seed ?? 1);
    this.truthModel = new TruthModel(this.rig, this.sim);
    this.sensors = new SensorBank(this.sim, this.rng);
    this.output = opts.output ?? null;
    this.intervalMs = opts.realtimeIntervalMs ?? 5;
    const k = this.sim;
    const sup = this.rig.supply;
    const brownoutV = k.brownout_v > 0 ? k.brownout_v : sup.cells ? sup.cells * 3.0 : (sup.voltage_v ?? 0) * 0.7;
    this.fw = new Firmware(
      {
        name: SIM_FIRMWARE_NAME,
        version: SIM_FIRMWARE_VERSION,
        caps: this.sensors.rates,
        ceiling: k.throttle_ceiling,
        heartbeatTimeoutMs: k.heartbeat_timeout_ms,
        escRateHz: k.esc_rate_hz,
        overcurrentA: k.overcurrent_a,
        overcurrentMs: k.overcurrent_ms,
        brownoutV,
        brownoutMs: k.brownout_ms,
        sensorTimeoutMs: k.sensor_timeout_ms,
        statPeriodMs: k.stat_period_ms,
        commandsPerTick: 4,
        queueCap: 32,
      },
      (line) => this.queueOut(line),
      opts.clockOffsetUs ?? 0,
      opts.initialTxSeq ?? 0,
    );
    this.fw.onEvent = (e) => {
      for (const l of this.eventListeners) l(e);
    };
    this.fw.boot(0, 'none');
    this.flush();
  }

  // ------------------------------------------------------------------ host side

  /** Sets (or removes) the callback that receives bytes for the host. */
  setOutput(fn: ((chunk: string) => void) | null): void {
    this.output = fn;
  }

  /** Bytes from the host. Decoded at once; STOP and HB act immediately, other commands at the next tick. */
  receive(chunk: Buffer | string): void {
    if (this.unplugged || this.offlineUntilUs !== null) return;
    let data = typeof chunk === 'string' ? Buffer.from(chunk, 'latin1') : chunk;
    if (this.garble.h2d > 0) data = this.garbleBytes(data, this.garble.h2d);
    this.fw.receive(data, this.simUs);
    this.flush();
  }

  /** Listens to the firmware's typed events (transitions, refusals, faults, bad lines). Returns an unsubscribe. */
  onFirmwareEvent(fn: (e: FirmwareEvent) => void): () => void {
    this.eventListeners.add(fn);
    return () => this.eventListeners.delete(fn);
  }

  /** Listens for the real-time loop failing (a simulator bug); the bench stays stopped. Returns an unsubscribe. */
  onError(fn: (e: Error) => void): () => void {
    this.errorListeners.add(fn);
    return () => this.errorListeners.delete(fn);
  }

  /** Listens to unplug/replug (fault 'unplug'). Returns an unsubscribe. */
  onLink(fn: BenchLinkListener): () => void {
    this.linkListeners.add(fn);
    return () => this.linkListeners.delete(fn);
  }

  // ------------------------------------------------------------------ time

  /**
   * Runs the device for `ms` milliseconds of simulated time (fractions carry over to the next call).
   * With `silent`, whatever the device sends meanwhile is dropped (nobody was listening).
   */
  advance(ms: number, opts: { silent?: boolean } = {}): void {
    if (!(ms >= 0)) throw new RangeError(`advance(${ms}): expected a non-negative number of milliseconds`);
    this.carryUs += ms * 1000;
    const wasSilent = this.silent;
    this.silent = opts.silent ?? wasSilent;
    try {
      while (this.carryUs >= TICK_US) {
        this.carryUs -= TICK_US;
        this.tick();
      }
    } finally {
      this.silent = wasSilent;
    }
  }

  /**
   * Follows real time: a timer every few milliseconds simulates everything due since the last one. After a
   * stopRealtime() the device first lives through the pause (up to 10 s, output dropped), as a powered board
   * would while nobody had its port open: a heartbeat lost meanwhile is latched when the host comes back.
   */
  startRealtime(): void {
    if (this.timer) return;
    if (this.dead) throw this.dead;
    if (this.pausedAtMs !== null) {
      this.advance(Math.min(MAX_PAUSE_CATCHUP_MS, performance.now() - this.pausedAtMs), { silent: true });
      this.pausedAtMs = null;
    }
    let last = performance.now();
    this.timer = setInterval(() => {
      const now = performance.now();
      // With a short heartbeat time-out the cap shrinks with it: a stall is then lost time, not host silence.
      const dt = Math.min(MAX_REALTIME_CATCHUP_MS, this.sim.heartbeat_timeout_ms / 4, now - last);
      last = now;
      try {
        this.advance(dt);
      } catch (err) {
        // A simulator bug must not take the daemon down from inside a timer: the "board" dies instead, and
        // whoever listens (the transport) reports the link as closed with the error.
        this.stopRealtime();
        this.dead = err instanceof Error ? err : new Error(String(err));
        for (const l of this.errorListeners) l(this.dead);
      }
    }, this.intervalMs);
    // The bench never keeps a process alive by itself; whoever owns the transport does.
    this.timer.unref?.();
  }

  stopRealtime(): void {
    if (!this.timer) return;
    clearInterval(this.timer);
    this.timer = null;
    this.pausedAtMs = performance.now();
  }

  get realtime(): boolean {
    return this.timer !== null;
  }

  // ------------------------------------------------------------------ read-only state

  get state(): BenchSnapshot {
    const fw = this.fw;
    return {
      mode: fw.mode,
      armed: fw.armed,
      handshaken: fw.handshaken,
      output: this.offlineUntilUs !== null ? 0 : fw.output,
      commanded: fw.commanded,
      fault: fw.fault,
      hbOk: fw.hbOk,
      taring: fw.taring,
      deviceClockUs: fw.deviceClockUs,
      simTimeMs: this.simUs / 1000,
      unplugged: this.unplugged,
      offline: this.offlineUntilUs !== null,
      activeFaults: this.faults.filter((f) => f.active).map((f) => f.kind),
    };
  }

  /**
   * Other hardware on the same virtual stand (the daemon's mount, while disarmed): propeller, motor, ESC,
   * pack and duct from `hardware`, the board, its sensors and the truth constants (`sim`) unchanged. Injected
   * faults in force carry over to the new hardware.
   */
  remount(hardware: RigSpec): void {
    if (this.fw.output !== 0) throw new Error('the virtual bench is turning: disarm before changing its hardware');
    const { sim: _ignored, ...parts } = hardware;
    this.rig = { ...parts, ...(this.rig.sim !== undefined ? { sim: this.rig.sim } : {}) };
    const mods = this.truthModel.mods;
    this.truthModel = new TruthModel(this.rig, this.sim);
    Object.assign(this.truthModel.mods, mods);
  }

  /** The host's heartbeat as the firmware saw it since the last reset (count, longest gap). */
  heartbeatWindow(reset = false): { count: number; maxGapMs: number } {
    return this.fw.heartbeatWindow(reset);
  }

  /** Physical truth right now (what no sensor reports exactly). */
  get truth(): Readonly<TruthState> {
    return { ...this.truthModel.state };
  }

  /** What the duct realises, or null for an open rotor. */
  get ductFactors(): DuctFactors | null {
    return this.truthModel.duct;
  }

  /** Truth propeller coefficients at an rpm (for tests and for judging a predictor). */
  coefficients(rpm: number): { ct: number; cp: number; cpInduced: number; cpProfile: number } {
    return this.truthModel.coefficients(rpm);
  }

  /** The firmware's bug switches (all off on a good board): the checker's tests make broken boards with them. */
  get firmwareBugs(): FirmwareBugs {
    return this.fw.bugs;
  }

  get transitions(): readonly FwTransition[] {
    return this.fw.transitions;
  }

  get stats(): Readonly<FirmwareStats> {
    return this.fw.stats;
  }

  get unplugged(): boolean {
    return this.unplugCount > 0;
  }

  // ------------------------------------------------------------------ fault injection

  /** Injects a fault (see faults.ts for what each kind does and its options). */
  /**
   * Hangs a calibration mass (kg) on the load cell, or removes it (0): the operator's part of a span
   * calibration. Standard gravity, 9.80665 m/s^2 (CGPM 1901).
   */
  hangMass(kg: number): void {
    if (!Number.isFinite(kg) || kg < 0 || kg > 100) throw new RangeError(`calibration mass ${kg} kg outside 0..100`);
    this.sensors.externalLoadN = kg * 9.80665;
  }

  injectFault<K extends InjectedFaultKind>(kind: K, options: FaultOptions[K] = {} as FaultOptions[K]): InjectedFault {
    const o = options as FaultOptions[InjectedFaultKind] & { duration_ms?: number; after_ms?: number };
    const startUs = this.simUs + Math.max(0, o.after_ms ?? 0) * 1000;
    const endUs = o.duration_ms !== undefined ? startUs + Math.max(0, o.duration_ms) * 1000 : Infinity;
    const [start, stop] = this.faultActions(kind, options);
    const entry: FaultEntry = { kind, startUs, endUs, active: false, ended: false, start, stop };
    this.faults.push(entry);
    this.runFaultSchedule();
    this.flush();
    return {
      kind,
      get active() {
        return entry.active;
      },
      get ended() {
        return entry.ended;
      },
      clear: () => {
        this.endFault(entry);
        this.flush();
      },
    };
  }

  /** Ends every injected fault. */
  clearFaults(): void {
    for (const f of [...this.faults]) this.endFault(f);
    this.flush();
  }

  private faultActions<K extends InjectedFaultKind>(kind: K, options: FaultOptions[K]): [() => void, () => void] {
    const mods = this.truthModel.mods;
    const sup = this.rig.supply;
    switch (kind) {
      case 'overcurrent': {
        const o = options as FaultOptions['overcurrent'];
        return [() => (mods.extraCurrentA = o.current_a ?? 60), () => (mods.extraCurrentA = 0)];
      }
      case 'stall':
        return [() => (mods.stalled = true), () => (mods.stalled = false)];
      case 'prop_loss': {
        const o = options as FaultOptions['prop_loss'];
        return [() => (mods.propFraction = Math.min(1, Math.max(0, o.remaining_fraction ?? 0.1))), () => (mods.propFraction = 1)];
      }
      case 'stand_disturbance': {
        const o = options as FaultOptions['stand_disturbance'];
        return [() => (this.sensors.disturbanceN = o.amplitude_n ?? 0.3), () => (this.sensors.disturbanceN = 0)];
      }
      case 'zero_shift': {
        const o = options as FaultOptions['zero_shift'];
        const shift = o.shift_n ?? 0.2;
        const rate = Math.abs(shift) / Math.max(0.001, (o.ramp_ms ?? 2000) / 1000);
        const set = (target: number) => {
          this.sensors.zeroShiftTargetN = target;
          this.sensors.zeroShiftRateNPerS = rate;
        };
        return [() => set(shift), () => set(0)];
      }
      case 'thrust_dropout': {
        const o = options as FaultOptions['thrust_dropout'];
        return [() => (this.sensors.dropout = o.mode ?? 'silent'), () => (this.sensors.dropout = null)];
      }
      case 'garbled_lines': {
        const o = options as FaultOptions['garbled_lines'];
        const p = Math.min(1, Math.max(0, o.probability ?? 0.2));
        const dir = o.direction ?? 'd2h';
        return [
          () => (this.garble = { d2h: dir === 'h2d' ? 0 : p, h2d: dir === 'd2h' ? 0 : p }),
          () => (this.garble = { d2h: 0, h2d: 0 }),
        ];
      }
      case 'unplug':
        return [
          () => {
            this.outBuf = [];
            if (this.unplugCount++ === 0) for (const l of this.linkListeners) l(false);
          },
          () => {
            if (--this.unplugCount === 0) for (const l of this.linkListeners) l(true);
          },
        ];
      case 'brownout': {
        const o = options as FaultOptions['brownout'];
        const v = o.voltage_v ?? (sup.cells ? sup.cells * 2.9 : (sup.voltage_v ?? 0) * 0.6);
        return [() => (mods.supplyDipV = v), () => (mods.supplyDipV = null)];
      }
      case 'reset': {
        const o = options as FaultOptions['reset'];
        return [
          () => {
            this.outBuf = [];
            this.offlineUntilUs = this.simUs + Math.max(0, o.down_ms ?? 50) * 1000;
          },
          () => {},
        ];
      }
      case 'ignore_heartbeat':
        return [() => (this.fw.bugs.ignoreHeartbeat = true), () => (this.fw.bugs.ignoreHeartbeat = false)];
    }
    throw new RangeError(`unknown fault kind ${String(kind)}`);
  }

  private endFault(f: FaultEntry): void {
    if (f.ended) return;
    if (f.active) f.stop();
    f.active = false;
    f.ended = true;
    const i = this.faults.indexOf(f);
    if (i >= 0) this.faults.splice(i, 1);
  }

  private runFaultSchedule(): void {
    for (const f of [...this.faults]) {
      if (!f.active && !f.ended && this.simUs >= f.startUs) {
        f.active = true;
        f.start();
      }
      if (f.active && this.simUs >= f.endUs) this.endFault(f);
    }
  }

  // ------------------------------------------------------------------ the main loop

  private tick(): void {
    this.simUs += TICK_US;
    this.runFaultSchedule();
    const offline = this.offlineUntilUs !== null;
    // While the controller is down its pins float and the ESC sees no pulse: no drive.
    this.truthModel.step(TICK_US / 1e6, offline ? 0 : this.fw.output);
    const samples = this.sensors.tick(this.simUs, TICK_US / 1e6, this.truthModel.state);
    if (offline) {
      if (this.simUs >= this.offlineUntilUs!) {
        this.offlineUntilUs = null;
        this.sensors.restart(this.simUs);
        this.fw.boot(this.simUs, 'reset');
      }
    } else {
      this.fw.tick(this.simUs, samples);
    }
    this.flush();
  }

  private queueOut(line: string): void {
    if (this.unplugged || this.silent) return;
    this.outBuf.push(this.garble.d2h > 0 && this.rng.next() < this.garble.d2h ? this.garbleLine(line) : line);
  }

  private flush(): void {
    if (this.outBuf.length === 0) return;
    const chunk = this.outBuf.join('');
    this.outBuf = [];
    if (this.output && !this.unplugged && !this.silent) this.output(chunk);
  }

  /** Changes one character before the newline so the checksum no longer matches. */
  private garbleLine(line: string): string {
    const body = line.length - 1;
    if (body <= 0) return line;
    const i = this.rng.int(body);
    const c = line.charCodeAt(i);
    const repl = c === 0x7e ? 0x21 : c + 1;
    return line.slice(0, i) + String.fromCharCode(repl) + line.slice(i + 1);
  }

  private garbleBytes(data: Buffer, p: number): Buffer {
    const out = Buffer.from(data);
    // About `p` of the lines get one flipped bit; newlines are never created or destroyed, so framing survives.
    const perByte = p / 30;
    for (let i = 0; i < out.length; i++) {
      if (out[i] !== 10 && this.rng.next() < perByte) {
        const flipped = out[i] ^ 0x01;
        if (flipped !== 10) out[i] = flipped;
      }
    }
    return out;
  }
}
