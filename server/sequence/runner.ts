// The sequence runner: walks a plan step by step through the bench controller (the one owner of the
// throttle), one tick every 25 ms (40 Hz), under the state machine in run-state.ts.
//
// Safety decisions (documented in SCHEMA.md as well):
// - Checks first. The plan is checked against the device's announced ceiling, the rig's throttle limit and
//   the bench state before arming; a refusal throws SequenceError and nothing is armed.
// - Ramps are small throttle steps, one per tick, each acknowledged by the device before the next is sent,
//   never faster than the slew limit (default 0.5 of full throttle per second; a sequence may ask for less).
//   After a stalled event loop a ramp does not jump: one tick never covers more than 100 ms of slew.
// - Pause ramps down quickly and DISARMS. An armed ESC at zero throttle spins up on the next command, and a
//   paused bench is exactly when someone walks up to it. Resume arms again and repeats the interrupted step
//   from its ramp (a partly measured window is discarded).
// - Abort is an operator action, not an emergency: ramp down quickly (default 2 per second, under half a
//   second from the ceiling), then disarm, so no fault is latched. A second abort while ramping down, or
//   cut(), is the emergency path: controller.stop() first, then the bookkeeping.
// - The runner watches the bench: a trip (host interlock or latched device fault) ends the run as tripped;
//   a lost link, a device that disarmed or restarted by itself, or a throttle command that failed ends it as
//   interrupted. In all of these the cut comes from the controller, the device or its heartbeat; the runner
//   only adds a STOP when a command of its own failed (it no longer knows what the motor is doing).
// - Every run ends with the throttle at zero and the device disarmed (or cut by a STOP).

import type { BenchView, DeviceIdentity } from '../api/messages.js';
import type { BenchController, TripRecord } from '../bench/controller.js';
import type { Sample } from '../bench/telemetry.js';
import { TypedEmitter } from '../util/emitter.js';
import { WindowMeasurement, SEA_LEVEL_DENSITY, type MeasureContext } from './measure.js';
import { checkPlan, type PlanLimits } from './plan.js';
import { isLive, isSpinning, isTerminal, isWindingDown, nextRunState, type RunInput, type RunOutcome, type RunState, type RunTransition } from './run-state.js';
import { SequenceError, type SequenceIssue } from './schema.js';
import { judgeSettle } from './settle.js';
import type { PlannedStep, PredictFn, RunPoint, SequencePlan } from './types.js';

export const DEFAULT_MAX_SLEW_PER_S = 0.5;
export const DEFAULT_ABORT_SLEW_PER_S = 2;
export const DEFAULT_TICK_MS = 25;
/** Longest slew one tick may apply, ms (an event loop that stalled must not turn into a throttle jump). */
const MAX_SLEW_DT_MS = 100;
/** Temperature is judged on its mean over this long (one noisy reading must not start a cool-down). */
const TEMP_WINDOW_MS = 1000;
const PROGRESS_EVERY_MS = 500;

/** What the runner needs of the controller; the real BenchController fits, tests may pass their own. */
export type RunnerController = Pick<BenchController, 'state' | 'view' | 'arm' | 'disarm' | 'setThrottle' | 'stop' | 'on'> & {
  /** The controller's own upward slew limit (the throttle_slew interlock), when it has one. */
  readonly maxSlewPerS?: number;
};

export interface RunnerBench {
  controller: RunnerController;
  /** Every calibrated sample (RunningDaemon.onSample fits). Returns an unsubscribe. */
  onSample(fn: (s: Sample, arrivedAt: number) => void): () => void;
  /** The connected device's identity (for the temperature channel check); optional. */
  identity?: () => DeviceIdentity | null;
}

export interface RunnerOptions {
  /** The rig's throttle limit (below the device's ceiling, or null). */
  rigCeiling?: number | null;
  /** The rig's motor temperature limit (degC), used by a cool-down that names none. */
  temperatureLimitC?: number | null;
  /** Rotor disk area for the figure of merit (null: figure of merit not computed). */
  diskArea_m2?: number | null;
  /** Air density for the figure of merit; default 1.225 kg/m^3 (ISA sea level). */
  airDensity_kg_m3?: number;
  predict?: PredictFn | null;
  /** Slew limit for ramps, throttle per second (default 0.5); the sequence's and the controller's apply if lower. */
  maxSlewPerS?: number;
  /** Slew for pause and abort ramp-downs (default 2 per second). */
  abortSlewPerS?: number;
  tickMs?: number;
  /** How long to wait for the device to report itself armed (default 3000 ms). */
  armTimeoutMs?: number;
  /** How long to wait for the DISARM acknowledgement before cutting with STOP (default 3000 ms). */
  disarmTimeoutMs?: number;
  /** Host clock in ms since the epoch; must match the samples' `t` (default Date.now). */
  now?: () => number;
}

export interface RunProgress {
  state: RunState;
  /** Current step, 1-based (0 before the first). */
  step: number;
  steps: number;
  /** Throttle the current step aims for, or null between steps. */
  target: number | null;
  /** Throttle last acknowledged by the device. */
  throttle: number;
  points: number;
  elapsed_s: number;
  /** Estimated seconds to the end (null once the run is over or while paused). */
  remaining_s: number | null;
}

export interface RunTrip {
  rule: string;
  value: number | null;
  limit: number | null;
  detail: string;
  /** From the offending reading's arrival to the cut being written, ms; null when the device cut by itself. */
  cut_latency_ms: number | null;
  source: 'host' | 'device';
}

export interface RunTransitionEvent extends RunTransition {
  t: number;
  /** Index of the current step (from 0). */
  step: number;
}

export interface RunResult {
  outcome: RunOutcome;
  reason: string;
  trip: RunTrip | null;
  points: RunPoint[];
  transitions: RunTransitionEvent[];
  sequence: { name: string; steps: number };
  started_at: number;
  ended_at: number;
}

export interface RunnerEvents {
  transition: RunTransitionEvent;
  progress: RunProgress;
  point: RunPoint;
  done: RunResult;
}

export interface RunView {
  state: RunState;
  reason: string;
  progress: RunProgress;
}

function moveToward(from: number, to: number, maxStep: number): number {
  if (Math.abs(to - from) <= maxStep) return to;
  return from + Math.sign(to - from) * maxStep;
}

export class SequenceRunner extends TypedEmitter<RunnerEvents> {
  private stateValue: RunState = 'idle';
  private reasonValue = 'not started';
  private readonly now: () => number;
  private maxSlew: number;
  private abortSlew: number;
  private readonly measureCtx: MeasureContext;
  private readonly pointsList: RunPoint[] = [];
  private readonly transitions: RunTransitionEvent[] = [];
  private readonly recent: Sample[] = [];
  private readonly keepMs: number;
  private readonly unsubscribe: (() => void)[] = [];
  private timer: ReturnType<typeof setInterval> | null = null;
  private resolveDone!: (r: RunResult) => void;
  readonly done: Promise<RunResult>;
  private resultValue: RunResult | null = null;

  private stepIdx = 0;
  /** Throttle the device last acknowledged. */
  private commanded = 0;
  private writing = false;
  private lastWriteAt = 0;
  private rampRate = DEFAULT_MAX_SLEW_PER_S;
  private settleStartAt = 0;
  private lastSettleWhy = '';
  private measurement: WindowMeasurement | null = null;
  private measureSettled = false;
  private measureSettleS = 0;
  private readonly settleDurations: number[] = [];
  private coolStartAt = 0;
  private armStartedAt = 0;
  private armAcked = false;
  private armGeneration = 0;
  private disarmStarted = false;
  private startedAt = 0;
  private lastProgressAt = 0;
  private tripRecord: TripRecord | null = null;
  private benchFault: BenchView['fault'] = 'none';
  private temperatureLimit: number | null = null;

  constructor(
    private readonly bench: RunnerBench,
    readonly plan: SequencePlan,
    private readonly opts: RunnerOptions = {},
  ) {
    super();
    this.now = opts.now ?? Date.now;
    this.maxSlew = Math.min(opts.maxSlewPerS ?? DEFAULT_MAX_SLEW_PER_S, plan.maxSlewPerS ?? Infinity);
    this.abortSlew = Math.max(this.maxSlew, opts.abortSlewPerS ?? DEFAULT_ABORT_SLEW_PER_S);
    this.measureCtx = { airDensity_kg_m3: opts.airDensity_kg_m3 ?? SEA_LEVEL_DENSITY, diskArea_m2: opts.diskArea_m2 ?? null, predict: opts.predict ?? null };
    this.keepMs = Math.max(plan.settle.window_s * 1000, TEMP_WINDOW_MS) + 500;
    this.done = new Promise((r) => (this.resolveDone = r));
  }

  get state(): RunState {
    return this.stateValue;
  }

  get points(): readonly RunPoint[] {
    return this.pointsList;
  }

  get result(): RunResult | null {
    return this.resultValue;
  }

  view(): RunView {
    return { state: this.stateValue, reason: this.reasonValue, progress: this.progress() };
  }

  /** What stands in the way of starting now (empty: start() will arm). Nothing is sent to the device. */
  check(): SequenceIssue[] {
    const c = this.bench.controller;
    const issues: SequenceIssue[] = [];
    if (c.state !== 'safe') {
      issues.push({ path: '', rule: `the bench is ${c.state}; a sequence starts only from safe (connected, disarmed, no trip latched)` });
    }
    const id = this.bench.identity?.() ?? null;
    const limits: PlanLimits = {
      deviceCeiling: c.view().ceiling,
      rigCeiling: this.opts.rigCeiling ?? null,
      temperatureLimitC: this.opts.temperatureLimitC ?? null,
      ...(id ? { hasTemperature: (id.channels.temp ?? 0) > 0 } : {}),
    };
    issues.push(...checkPlan(this.plan, limits));
    return issues;
  }

  /**
   * Checks, arms and runs. Throws SequenceError (before anything is sent) when the checks fail; otherwise
   * resolves with the result whatever the outcome.
   */
  start(): Promise<RunResult> {
    if (this.stateValue !== 'idle') return Promise.reject(new Error(`sequence already ${this.stateValue}`));
    const issues = this.check();
    if (issues.length) return Promise.reject(new SequenceError(issues));
    this.temperatureLimit = this.plan.coolDown ? (this.plan.coolDown.limit_c ?? this.opts.temperatureLimitC ?? null) : null;
    const c = this.bench.controller;
    // Below the controller's own limit, so a ramp step is never split (and delayed) by the controller.
    if (c.maxSlewPerS !== undefined && c.maxSlewPerS > 0) this.maxSlew = Math.min(this.maxSlew, c.maxSlewPerS);
    this.unsubscribe.push(
      this.bench.onSample((s) => this.onSample(s)),
      c.on('transition', (tr) => this.onBenchTransition(tr)),
      c.on('trip', (rec) => this.onTrip(rec)),
    );
    this.startedAt = this.now();
    this.timer = setInterval(() => this.tick(), this.opts.tickMs ?? DEFAULT_TICK_MS);
    this.fire({ kind: 'start', steps: this.plan.steps.length });
    return this.done;
  }

  /** Ramps down, disarms and waits for resume(). Returns false when there is nothing to pause. */
  pause(source = 'operator'): boolean {
    return this.fire({ kind: 'pause', source });
  }

  resume(source = 'operator'): boolean {
    return this.fire({ kind: 'resume', source });
  }

  /** Operator abort: ramp down quickly, disarm. A second abort while ramping down cuts at once. */
  abort(source = 'operator'): boolean {
    if (this.stateValue === 'aborting') return this.cut(source);
    return this.fire({ kind: 'abort', source });
  }

  /** Emergency: controller.stop() first (STOP straight to the device), then the run ends as aborted. */
  cut(source = 'operator'): boolean {
    if (!isLive(this.stateValue)) return false;
    this.bench.controller.stop(`sequence: ${source}`);
    return this.fire({ kind: 'cut', source });
  }

  // ------------------------------------------------------------------ the machine

  private fire(input: RunInput): boolean {
    const tr = nextRunState(this.stateValue, input);
    if (!tr) return false;
    this.stateValue = tr.to;
    this.reasonValue = tr.reason;
    const ev: RunTransitionEvent = { ...tr, t: this.now(), step: this.stepIdx };
    this.transitions.push(ev);
    this.enter(tr, input);
    this.emit('transition', ev);
    this.emitProgress(true);
    return true;
  }

  /** Sets up what the new state needs. */
  private enter(tr: RunTransition, input: RunInput): void {
    const now = this.now();
    switch (tr.to) {
      case 'preparing':
        this.beginArm(now);
        return;
      case 'ramping': {
        this.measurement = null;
        const step = this.currentStep();
        const delta = Math.abs(step.throttle - this.commanded);
        this.rampRate = step.ramp_s > 0 && delta > 0 ? Math.min(this.maxSlew, delta / step.ramp_s) : this.maxSlew;
        this.lastWriteAt = now;
        return;
      }
      case 'settling':
        this.settleStartAt = now;
        this.lastSettleWhy = '';
        return;
      case 'measuring':
        this.measureSettled = input.kind === 'settled';
        this.measureSettleS = (now - this.settleStartAt) / 1000;
        if (this.measureSettled) this.settleDurations.push(this.measureSettleS);
        this.measurement = new WindowMeasurement(now);
        return;
      case 'cooling':
        this.coolStartAt = now;
        this.measurement = null;
        this.lastWriteAt = now;
        return;
      case 'pausing':
      case 'finishing':
      case 'aborting':
        // From one wind-down to another (pause, then abort) the disarm already under way still counts.
        if (!isWindingDown(tr.from)) this.disarmStarted = false;
        this.measurement = null;
        this.lastWriteAt = now;
        return;
      case 'paused':
        return;
      case 'completed':
      case 'aborted':
      case 'tripped':
      case 'interrupted':
        this.stopTimer();
        if (tr.to === 'tripped') this.benchFault = this.bench.controller.view().fault;
        // The trip record follows the bench's transition synchronously (controller.trip emits 'transition'
        // before 'trip'), so the result is put together once the current call stack has run.
        queueMicrotask(() => this.finish(tr.to as RunOutcome));
        return;
      case 'idle':
        return;
    }
  }

  private tick(): void {
    if (!isLive(this.stateValue)) return;
    const now = this.now();
    this.prune(now);
    try {
      switch (this.stateValue) {
        case 'preparing':
          this.tickPreparing(now);
          break;
        case 'ramping':
          if (this.tooHot()) break;
          {
            const step = this.currentStep();
            if (this.slewToward(step.throttle, this.rampRate, now)) this.fire({ kind: 'ramp_done', step: step.index, throttle: step.throttle });
          }
          break;
        case 'settling':
          if (this.tooHot()) break;
          this.tickSettling(now);
          break;
        case 'measuring':
          if (this.tooHot()) break;
          this.tickMeasuring(now);
          break;
        case 'cooling':
          this.tickCooling(now);
          break;
        case 'pausing':
        case 'aborting':
          this.tickWindDown(now, this.abortSlew);
          break;
        case 'finishing':
          this.tickWindDown(now, this.maxSlew);
          break;
        default:
          break;
      }
    } catch (err) {
      this.failAndCut(`runner error: ${(err as Error).message}`);
    }
    if (isLive(this.stateValue) && now - this.lastProgressAt >= PROGRESS_EVERY_MS) this.emitProgress(false);
  }

  private tickPreparing(now: number): void {
    if (this.armAcked && this.bench.controller.state === 'armed') {
      this.commanded = 0;
      this.lastWriteAt = now;
      this.fire({ kind: 'armed' });
    } else if (now - this.armStartedAt > (this.opts.armTimeoutMs ?? 3000)) {
      this.failAndCut(`device did not report itself armed within ${this.opts.armTimeoutMs ?? 3000} ms`);
    }
  }

  private tickSettling(now: number): void {
    const step = this.currentStep();
    const settle = this.plan.settle;
    const elapsed = (now - this.settleStartAt) / 1000;
    if (elapsed >= settle.window_s) {
      const from = now - settle.window_s * 1000;
      const v = judgeSettle(this.recentSince(from), settle);
      if (v.steady) {
        this.fire({ kind: 'settled', after_s: elapsed });
        return;
      }
      this.lastSettleWhy = v.why;
    }
    if (elapsed >= step.hold_s) this.fire({ kind: 'settle_timeout', hold_s: step.hold_s, why: this.lastSettleWhy || 'window not filled' });
  }

  private tickMeasuring(now: number): void {
    const m = this.measurement;
    const step = this.currentStep();
    if (!m || now - m.startedAt < step.window_s * 1000) return;
    const point = m.finish(step, now, this.measureSettled, this.measureSettleS, this.measureCtx);
    this.measurement = null;
    this.pointsList.push(point);
    this.emit('point', point);
    const last = step.index === this.plan.steps.length - 1;
    if (!last) this.stepIdx++;
    this.fire({ kind: 'point_done', step: step.index, last });
  }

  private tickCooling(now: number): void {
    const cd = this.plan.coolDown!;
    const temp = this.meanTemp(now);
    if (temp !== null && temp < cd.resume_below_c) {
      this.fire({ kind: 'cooled', temp_c: temp });
      return;
    }
    if (now - this.coolStartAt > cd.max_s * 1000) {
      this.fire({ kind: 'cool_timeout', max_s: cd.max_s, temp_c: temp ?? NaN });
      return;
    }
    this.slewToward(cd.throttle, this.abortSlew, now);
  }

  private tickWindDown(now: number, rate: number): void {
    if (this.disarmStarted) return;
    if (!this.slewToward(0, rate, now)) return;
    this.disarmStarted = true;
    const timeout = this.opts.disarmTimeoutMs ?? 3000;
    let settled = false;
    const timer = setTimeout(() => {
      if (settled) return;
      settled = true;
      this.bench.controller.stop('sequence: disarm not acknowledged');
      this.fire({ kind: 'down', note: `DISARM not acknowledged within ${timeout} ms, cut with STOP` });
    }, timeout);
    this.bench.controller.disarm().then(
      () => {
        if (settled) return;
        settled = true;
        clearTimeout(timer);
        this.fire({ kind: 'down' });
      },
      (err: Error) => {
        if (settled) return;
        settled = true;
        clearTimeout(timer);
        // The device did not take the DISARM: cut it the hard way (the output is at zero already).
        if (isLive(this.stateValue)) this.bench.controller.stop('sequence: disarm failed');
        this.fire({ kind: 'down', note: `DISARM failed (${err.message}), cut with STOP` });
      },
    );
  }

  /** Starts a cool-down when the temperature is near its limit. */
  private tooHot(): boolean {
    const cd = this.plan.coolDown;
    if (!cd || this.temperatureLimit === null) return false;
    const temp = this.meanTemp(this.now());
    const threshold = this.temperatureLimit - cd.margin_c;
    if (temp === null || temp < threshold) return false;
    return this.fire({ kind: 'too_hot', temp_c: temp, threshold_c: threshold });
  }

  /**
   * One slew step toward target (a write in flight means wait for its acknowledgement first). Returns true
   * once the device has acknowledged the target itself.
   */
  private slewToward(target: number, rate: number, now: number): boolean {
    if (this.writing) return false;
    if (this.commanded === target) {
      this.lastWriteAt = now;
      return true;
    }
    const dt = Math.min(MAX_SLEW_DT_MS, Math.max(0, now - this.lastWriteAt)) / 1000;
    let next = moveToward(this.commanded, target, rate * dt);
    // The wire carries 4 decimals; rounding must never overshoot the target (it may be the ceiling).
    next = Math.round(next * 1e4) / 1e4;
    if ((target > this.commanded && next > target) || (target < this.commanded && next < target)) next = target;
    if (next === this.commanded) return false;
    this.write(next, now);
    return false;
  }

  private write(value: number, now: number): void {
    this.writing = true;
    this.lastWriteAt = now;
    this.bench.controller.setThrottle(value).then(
      () => {
        this.writing = false;
        this.commanded = value;
      },
      (err: Error) => {
        this.writing = false;
        if (!isLive(this.stateValue)) return;
        this.failAndCut(`throttle ${value}: ${err.message}`);
      },
    );
  }

  private beginArm(now: number): void {
    this.armStartedAt = now;
    this.armAcked = false;
    this.commanded = 0;
    const gen = ++this.armGeneration;
    this.bench.controller.arm().then(
      () => {
        if (gen === this.armGeneration) this.armAcked = true;
      },
      (err: Error) => {
        if (gen !== this.armGeneration || this.stateValue !== 'preparing') return;
        this.failAndCut(`could not arm: ${err.message}`);
      },
    );
  }

  /** The runner no longer knows what the motor is doing: STOP first, then end as interrupted. */
  private failAndCut(why: string): void {
    if (!isLive(this.stateValue)) return;
    this.bench.controller.stop(`sequence: ${why}`);
    this.fire({ kind: 'lost', why: `${why}; output cut` });
  }

  // ------------------------------------------------------------------ what the bench tells us

  private onSample(s: Sample): void {
    this.recent.push(s);
    this.measurement?.add(s);
  }

  private onBenchTransition(tr: { to: string; reason: string }): void {
    const st = this.stateValue;
    if (!isLive(st)) return;
    if (tr.to === 'tripped') {
      this.fire({ kind: 'trip', detail: `bench tripped: ${tr.reason}` });
    } else if (tr.to === 'disconnected' || tr.to === 'connecting') {
      // Nothing to write to: the device's heartbeat time-out cuts the output. Stop anyway in case it returns.
      this.bench.controller.stop('sequence: link lost');
      this.fire({ kind: 'lost', why: `link lost: ${tr.reason}` });
    } else if (tr.to === 'safe') {
      if (isSpinning(st)) this.fire({ kind: 'lost', why: `device disarmed by itself (${tr.reason})` });
      // Winding down anyway: the device being disarmed is where we were going.
      else if (isWindingDown(st) && !this.disarmStarted) {
        this.disarmStarted = true;
        this.fire({ kind: 'down', note: `the device disarmed by itself (${tr.reason})` });
      }
    }
  }

  private onTrip(rec: TripRecord): void {
    if (this.tripRecord === null && (isLive(this.stateValue) || this.stateValue === 'tripped')) this.tripRecord = rec;
  }

  // ------------------------------------------------------------------ helpers

  private currentStep(): PlannedStep {
    return this.plan.steps[Math.min(this.stepIdx, this.plan.steps.length - 1)];
  }

  private prune(now: number): void {
    const cutoff = now - this.keepMs;
    let i = 0;
    while (i < this.recent.length && this.recent[i].t < cutoff) i++;
    if (i > 0) this.recent.splice(0, i);
  }

  private recentSince(from: number): Sample[] {
    let i = this.recent.length;
    while (i > 0 && this.recent[i - 1].t >= from) i--;
    return this.recent.slice(i);
  }

  private meanTemp(now: number): number | null {
    let sum = 0;
    let n = 0;
    for (let i = this.recent.length - 1; i >= 0; i--) {
      const s = this.recent[i];
      if (s.t < now - TEMP_WINDOW_MS) break;
      if (s.temp !== null && Number.isFinite(s.temp)) {
        sum += s.temp;
        n++;
      }
    }
    return n > 0 ? sum / n : null;
  }

  private stopTimer(): void {
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
  }

  private finish(outcome: RunOutcome): void {
    if (this.resultValue) return;
    for (const off of this.unsubscribe.splice(0)) off();
    let trip: RunTrip | null = null;
    if (outcome === 'tripped') {
      const r = this.tripRecord;
      trip = r
        ? { rule: r.rule, value: r.value, limit: r.limit, detail: r.detail, cut_latency_ms: r.cutWrittenAt === null ? null : r.cutWrittenAt - r.arrivedAt, source: 'host' }
        : { rule: `device:${this.benchFault}`, value: null, limit: null, detail: this.reasonValue, cut_latency_ms: null, source: 'device' };
    }
    this.resultValue = {
      outcome,
      reason: this.reasonValue,
      trip,
      points: [...this.pointsList],
      transitions: [...this.transitions],
      sequence: { name: this.plan.name, steps: this.plan.steps.length },
      started_at: this.startedAt,
      ended_at: this.now(),
    };
    this.emit('done', this.resultValue);
    this.resolveDone(this.resultValue);
  }

  private emitProgress(force: boolean): void {
    const now = this.now();
    if (!force && now - this.lastProgressAt < PROGRESS_EVERY_MS) return;
    this.lastProgressAt = now;
    this.emit('progress', this.progress());
  }

  private progress(): RunProgress {
    const st = this.stateValue;
    const started = st !== 'idle';
    const inStep = isSpinning(st) || st === 'preparing' || st === 'pausing' || st === 'paused';
    return {
      state: st,
      step: started ? this.stepIdx + 1 : 0,
      steps: this.plan.steps.length,
      target: inStep ? this.currentStep().throttle : null,
      throttle: this.commanded,
      points: this.pointsList.length,
      elapsed_s: started ? (this.now() - this.startedAt) / 1000 : 0,
      remaining_s: isTerminal(st) || st === 'paused' || st === 'pausing' ? null : this.remaining(),
    };
  }

  /** Seconds left: this phase's remainder plus ramp, expected settle and window for each later step. */
  private remaining(): number {
    const now = this.now();
    const steps = this.plan.steps;
    const settleGuess = (s: PlannedStep) =>
      this.settleDurations.length ? Math.min(s.hold_s, this.settleDurations.reduce((a, b) => a + b, 0) / this.settleDurations.length) : s.hold_s;
    const rampTime = (from: number, s: PlannedStep) => Math.max(s.ramp_s, Math.abs(s.throttle - from) / this.maxSlew);
    const st = this.stateValue;
    let t = 0;
    let from = this.commanded;
    const cur = this.currentStep();
    if (st === 'finishing' || st === 'aborting') return this.commanded / (st === 'aborting' ? this.abortSlew : this.maxSlew);
    if (st === 'ramping' || st === 'preparing' || st === 'cooling') {
      t += rampTime(from, cur) + settleGuess(cur) + cur.window_s;
    } else if (st === 'settling') {
      t += Math.max(0, settleGuess(cur) - (now - this.settleStartAt) / 1000) + cur.window_s;
    } else if (st === 'measuring') {
      t += Math.max(0, cur.window_s - (now - (this.measurement?.startedAt ?? now)) / 1000);
    }
    from = cur.throttle;
    for (let i = this.stepIdx + 1; i < steps.length; i++) {
      t += rampTime(from, steps[i]) + settleGuess(steps[i]) + steps[i].window_s;
      from = steps[i].throttle;
    }
    return t + from / this.maxSlew;
  }
}
