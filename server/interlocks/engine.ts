// Runs the interlock rules: every sample goes through the sample rules before it is stored or broadcast, and
// a timer runs the tick rules. A trip calls the controller's trip(), which writes the cut before anything
// else happens; warnings are rate-limited per rule and reported as events.

import { BAND_K } from '../model/band.js';
import type { BenchState } from '../api/messages.js';
import type { Sample } from '../bench/telemetry.js';
import { TypedEmitter } from '../util/emitter.js';
import { staleLimitsFor } from '../../firmware-protocol/src/host-rules.js';
import type { Limits } from './limits.js';
import { OK, RULES, type Finding, type Rule, type RuleContext, type Verdict } from './rules.js';

/** What the engine needs of the bench: its state, and the cut. */
export interface TripTarget {
  readonly state: BenchState;
  trip(rule: string, value: number, limit: number, detail: string, arrivedAt: number): unknown;
}

export interface InterlockOptions {
  limits: Limits;
  /** Propeller diameter (m), for tip speed; null when no rig is known. */
  diameterM: number | null;
  /** Cells in series from the rig; null to use limits.cells or infer. */
  cells: number | null;
  /** Air temperature (K) for the speed of sound; 288.15 K (standard sea level) by default. */
  airTemperatureK?: number;
  /** Predicted grams per watt and thrust at a throttle and bus voltage, or null. */
  /**
   * `bandPct`: half-width of the model's own band there, % of the prediction; `zeros`: standard uncertainty of
   * the current sensor's zero (A) and the thrust zero (N), which the engine weighs against the measured power
   * and thrust (a wrong prediction of the power must not widen the band).
   */
  predictor?: ((throttle: number, voltage: number) => { gramsPerWatt: number; thrust_N: number; bandPct?: number; zeros?: { current_A: number; thrust_N: number } } | null) | null;
  /**
   * The deviation rule judges only where the predicted thrust is at least this (N): near idle, grams per
   * watt is a ratio of two small, offset-prone numbers and an ESC's start dead-band makes it meaningless.
   */
  deviationMinThrustN?: number;
  /** Total bad lines counted by the link so far. */
  badLineCount: () => number;
  /** Time source, ms (performance.now by default; tests pass their own). */
  now?: () => number;
  /** Tick rule period (ms); 0 disables the timer (tests call tick()). */
  tickMs?: number;
}

export interface InterlockEvents {
  warning: { rule: string; finding: Finding };
  trip: { rule: string; finding: Finding; sample: Sample | null; arrivedAt: number };
}

const WARN_REPEAT_MS = 2000;
const GAMMA_AIR = 1.4;
const R_AIR = 287.05287; // J/(kg K), ISO 2533

/** Sliding-window linear regression of thrust on time, O(1) per sample. */
class TrendWindow {
  private ts: number[] = [];
  private ys: number[] = [];
  private head = 0;
  private st = 0;
  private sy = 0;
  private stt = 0;
  private sty = 0;
  private syy = 0;
  private origin: number | null = null;
  private sinceRebuild = 0;

  constructor(private windowS: number) {}

  get n(): number {
    return this.ts.length - this.head;
  }

  add(tS: number, y: number): void {
    if (this.origin === null) this.origin = tS;
    const t = tS - this.origin;
    this.ts.push(t);
    this.ys.push(y);
    this.acc(t, y, 1);
    while (this.n > 0 && t - this.ts[this.head] > this.windowS) {
      this.acc(this.ts[this.head], this.ys[this.head], -1);
      this.head++;
    }
    // Compact and re-sum now and then: keeps arrays short and cancels rounding drift of the running sums.
    if (++this.sinceRebuild > 4096) this.rebuild();
  }

  /** Residual standard deviation about the least-squares line, or null with too little data. */
  residualStd(minPoints: number): number | null {
    const n = this.n;
    if (n < Math.max(minPoints, 3)) return null;
    const span = this.ts[this.ts.length - 1] - this.ts[this.head];
    if (span < 0.8 * this.windowS) return null;
    const ctt = this.stt - (this.st * this.st) / n;
    const cty = this.sty - (this.st * this.sy) / n;
    const cyy = this.syy - (this.sy * this.sy) / n;
    const rss = ctt > 0 ? cyy - (cty * cty) / ctt : cyy;
    return Math.sqrt(Math.max(0, rss) / (n - 2));
  }

  reset(): void {
    this.ts = [];
    this.ys = [];
    this.head = 0;
    this.st = this.sy = this.stt = this.sty = this.syy = 0;
    this.origin = null;
  }

  private acc(t: number, y: number, sign: 1 | -1): void {
    this.st += sign * t;
    this.sy += sign * y;
    this.stt += sign * t * t;
    this.sty += sign * t * y;
    this.syy += sign * y * y;
  }

  private rebuild(): void {
    const ts = this.ts.slice(this.head);
    const ys = this.ys.slice(this.head);
    const shift = ts.length ? ts[0] : 0;
    this.origin = (this.origin ?? 0) + shift;
    this.reset();
    this.origin = this.origin ?? 0;
    for (let i = 0; i < ts.length; i++) {
      this.ts.push(ts[i] - shift);
      this.ys.push(ys[i]);
      this.acc(ts[i] - shift, ys[i], 1);
    }
    this.sinceRebuild = 0;
  }
}

export class Interlocks extends TypedEmitter<InterlockEvents> {
  limits: Limits;
  private readonly opts: InterlockOptions;
  private readonly now: () => number;
  private trend: TrendWindow;
  private readonly exceededSince = new Map<string, number>();
  private readonly lastWarnAt = new Map<string, number>();
  private timer: NodeJS.Timeout | null = null;
  private readonly tickMs: number;
  private lastTickAt: number | null = null;
  private output = 0;
  private outputZeroSince: number | null = null;
  /** When the bench last became energised (armed), so "zero output for a while" counts from the arming. */
  private mayTurnSince: number | null = null;
  private lastFrameAt: number | null = null;
  private lastThrustAt: number | null = null;
  private cells: number | null;
  private badHistory: { t: number; total: number }[] = [];
  // steady-state efficiency for the prediction rule
  private emaThrust: number | null = null;
  private emaPower: number | null = null;
  private lastEmaT: number | null = null;
  private lastThrustEmaT: number | null = null;
  private outputChangedAt = 0;
  private lastPredictionAt = -Infinity;
  private predicted: number | null = null;
  /** Half-width of the prediction's band at the current throttle, % of the prediction (null: none given). */
  private predictedBandPct: number | null = null;
  private predictedZeros: { current_A: number; thrust_N: number } | null = null;
  private lastVoltage: number | null = null;
  private readonly speedOfSound: number;

  constructor(
    private readonly target: TripTarget,
    opts: InterlockOptions,
  ) {
    super();
    this.opts = opts;
    this.limits = opts.limits;
    this.now = opts.now ?? (() => performance.now());
    this.trend = new TrendWindow(opts.limits.vibration_window_s);
    this.cells = opts.cells ?? (opts.limits.cells > 0 ? opts.limits.cells : null);
    this.speedOfSound = Math.sqrt(GAMMA_AIR * R_AIR * (opts.airTemperatureK ?? 288.15));
    this.ctx = {
      limits: this.limits,
      now: 0,
      mayTurn: false,
      output: 0,
      outputZeroSince: null,
      outputSteadyForMs: 0,
      diameterM: opts.diameterM,
      speedOfSound: this.speedOfSound,
      cells: this.cells,
      thrustDetrendedStd: null,
      gpwMeasured: null,
      gpwPredicted: null,
      gpwBandPct: null,
      lastFrameAt: null,
      lastThrustAt: null,
      badLinesLastSecond: 0,
      staleFrameMs: opts.limits.stale_ms,
      staleThrustMs: opts.limits.thrust_stale_ms,
    };
    const tick = opts.tickMs ?? 25;
    this.tickMs = tick;
    if (tick > 0) {
      this.timer = setInterval(() => this.tick(), tick);
      this.timer.unref();
    }
  }

  /** Channel rates the device declared (IDENT caps), which set how long a silence is stale; {} before a handshake. */
  private declaredRates: Readonly<Record<string, number>> = {};

  /** Takes the device's declared channel rates (at every handshake). */
  setDeclaredRates(rates: Readonly<Record<string, number>>): void {
    this.declaredRates = { ...rates };
  }

  /** Frame and thrust staleness now in force (ms). */
  get staleLimits(): { frameMs: number; thrustMs: number } {
    return staleLimitsFor(this.declaredRates, this.limits);
  }

  get knownCells(): number | null {
    return this.cells;
  }

  close(): void {
    if (this.timer) clearInterval(this.timer);
    this.timer = null;
  }

  /**
   * A new mount (the bench is disarmed): its limits, propeller diameter, cells and prediction judge from the
   * next sample on. Readings of the old hardware say nothing about the new, so the history is dropped too.
   */
  remount(m: Pick<InterlockOptions, 'limits' | 'diameterM' | 'cells' | 'predictor' | 'deviationMinThrustN'>): void {
    this.limits = m.limits;
    this.opts.diameterM = m.diameterM;
    this.opts.predictor = m.predictor ?? null;
    this.opts.deviationMinThrustN = m.deviationMinThrustN ?? 0;
    this.cells = m.cells ?? (m.limits.cells > 0 ? m.limits.cells : null);
    this.trend = new TrendWindow(m.limits.vibration_window_s);
    this.predicted = null;
    this.lastPredictionAt = -Infinity;
    this.reset();
  }

  /** Forget per-connection history (after a reconnect the old readings say nothing about the new link). */
  reset(): void {
    this.trend.reset();
    this.exceededSince.clear();
    this.lastFrameAt = this.lastThrustAt = null;
    this.emaThrust = this.emaPower = this.lastEmaT = this.lastThrustEmaT = null;
    this.outputZeroSince = null;
  }

  /** Runs the sample rules. `arrivedAt` is when the line arrived (performance.now() base). */
  onSample(s: Sample, arrivedAt: number): void {
    const now = this.now();
    this.lastFrameAt = now;
    if (s.thrust !== null) {
      this.lastThrustAt = now;
      this.trend.add(s.dt, s.thrust);
    }
    if (s.out !== null) {
      if (Math.abs(s.out - this.output) > 0.005) this.outputChangedAt = now;
      this.output = s.out;
      if (s.out === 0) this.outputZeroSince ??= now;
      else this.outputZeroSince = null;
    }
    const mayTurn = this.mayTurn();
    if (mayTurn) this.mayTurnSince ??= now;
    else this.mayTurnSince = null;
    if (this.cells === null && !mayTurn && s.voltage !== null && s.voltage > 2) {
      // Resting voltage of a charged pack is at most 4.2-4.25 V a cell, so this never overcounts.
      this.cells = Math.ceil(s.voltage / 4.25);
    }
    this.updateEfficiency(s, now);
    const ctx = this.context(now, mayTurn);
    for (const rule of RULES) {
      if (!rule.sample) continue;
      const f = rule.sample(s, ctx);
      if (this.handle(rule, f, now, arrivedAt, s)) return; // tripped: the rest can wait
    }
  }

  /** Runs the tick rules (also called by the timer). */
  tick(): void {
    const now = this.now();
    // A tick that comes late means this process was stalled: the lines that arrived meanwhile are still
    // waiting in the operating system's buffer, read after the timers. Judging "no telemetry" now would blame
    // the device for the host's own pause; the next tick, after the reads, judges. (The firmware's heartbeat
    // time-out covers a host that stays stalled.)
    const late = this.lastTickAt !== null && this.tickMs > 0 && now - this.lastTickAt > 2 * this.tickMs + 50;
    this.lastTickAt = now;
    if (late) return;
    const total = this.opts.badLineCount();
    this.badHistory.push({ t: now, total });
    while (this.badHistory.length > 1 && now - this.badHistory[0].t > 1000) this.badHistory.shift();
    const ctx = this.context(now, this.mayTurn());
    for (const rule of RULES) {
      if (!rule.tick) continue;
      if (this.handle(rule, rule.tick(ctx), now, now, null, true)) return;
    }
  }

  private mayTurn(): boolean {
    const st = this.target.state;
    return st === 'armed' || st === 'running';
  }

  /**
   * The context the rules read, filled in place: one object for the engine's life rather than one per sample
   * (at hundreds of thousands of samples a second the allocation showed in the ingest profile). Rules only
   * read it during their call and keep nothing of it.
   */
  private readonly ctx: RuleContext;

  private context(now: number, mayTurn: boolean): RuleContext {
    const first = this.badHistory[0];
    const last = this.badHistory[this.badHistory.length - 1];
    const c = this.ctx;
    c.limits = this.limits;
    c.now = now;
    c.mayTurn = mayTurn;
    c.output = this.output;
    // Armed, the zero-output clock starts at the arming: the spin-down and the arming itself are not a loose rig.
    c.outputZeroSince = this.outputZeroSince === null ? null : mayTurn && this.mayTurnSince !== null ? Math.max(this.outputZeroSince, this.mayTurnSince) : this.outputZeroSince;
    c.outputSteadyForMs = now - this.outputChangedAt;
    c.diameterM = this.opts.diameterM;
    c.speedOfSound = this.speedOfSound;
    c.cells = this.cells;
    c.thrustDetrendedStd = this.trend.residualStd(8);
    c.gpwMeasured = this.steadyGpw(now);
    c.gpwPredicted = this.predicted;
    c.gpwBandPct = this.bandPct();
    c.lastFrameAt = this.lastFrameAt;
    c.lastThrustAt = this.lastThrustAt;
    c.badLinesLastSecond = first && last ? last.total - first.total : 0;
    const stale = this.staleLimits;
    c.staleFrameMs = stale.frameMs;
    c.staleThrustMs = stale.thrustMs;
    return c;
  }

  /** Returns true when the finding tripped the bench. */
  private handle(rule: Rule, v: Verdict, now: number, arrivedAt: number, s: Sample | null, immediate = false): boolean {
    if (v === null) return false; // nothing to judge in this sample: a pending debounce keeps running
    // Checked for size first: this runs for every rule on every sample, and nearly always nothing is pending.
    if ((v === OK || v.level !== 'trip') && this.exceededSince.size > 0) this.exceededSince.delete(rule.name);
    if (v === OK) return false;
    const f: Finding = v;
    if (f.level === 'trip') {
      const st = this.target.state;
      if (st === 'tripped' || st === 'disconnected') return false;
      const since = this.exceededSince.get(rule.name);
      if (since === undefined) this.exceededSince.set(rule.name, now);
      if (immediate || this.limits.debounce_ms === 0 || (since !== undefined && now - since >= this.limits.debounce_ms)) {
        // Cut first: everything after this line happens with the STOP already written.
        this.target.trip(rule.name, f.value, f.limit, f.detail, arrivedAt);
        this.exceededSince.delete(rule.name);
        this.emit('trip', { rule: rule.name, finding: f, sample: s, arrivedAt });
        return true;
      }
      return false;
    }
    const last = this.lastWarnAt.get(rule.name) ?? -Infinity;
    if (now - last >= WARN_REPEAT_MS) {
      this.lastWarnAt.set(rule.name, now);
      this.emit('warning', { rule: rule.name, finding: f });
    }
    return false;
  }

  private updateEfficiency(s: Sample, now: number): void {
    // Each channel's smoothing weight follows its own sampling interval: thrust arrives at 10-80 Hz,
    // power at hundreds of Hz; one shared clock would starve the slower channel.
    const tau = 500; // ms
    if (s.thrust !== null) {
      const a = this.lastThrustEmaT === null ? 1 : 1 - Math.exp(-(now - this.lastThrustEmaT) / tau);
      this.emaThrust = this.emaThrust === null ? s.thrust : this.emaThrust + a * (s.thrust - this.emaThrust);
      this.lastThrustEmaT = now;
    }
    if (s.power !== null) {
      const a = this.lastEmaT === null ? 1 : 1 - Math.exp(-(now - this.lastEmaT) / tau);
      this.emaPower = this.emaPower === null ? s.power : this.emaPower + a * (s.power - this.emaPower);
      this.lastEmaT = now;
    }
    if (s.voltage !== null) this.lastVoltage = s.voltage;
    const p = this.opts.predictor;
    if (p && s.voltage !== null && now - this.lastPredictionAt > 100) {
      this.lastPredictionAt = now;
      const pred = this.output > 0 ? p(this.output, s.voltage) : null;
      const judged = pred && pred.thrust_N >= (this.opts.deviationMinThrustN ?? 0);
      this.predicted = judged ? pred.gramsPerWatt : null;
      this.predictedBandPct = judged && pred.bandPct !== undefined && Number.isFinite(pred.bandPct) ? pred.bandPct : null;
      this.predictedZeros = judged ? (pred.zeros ?? null) : null;
    }
  }

  /** The band the deviation rule judges by: the model's, and the zeros' weight on the measured power and thrust, % (k = BAND_K). */
  private bandPct(): number | null {
    const m = this.predictedBandPct;
    const z = this.predictedZeros;
    if (m === null) return null;
    if (!z || this.emaPower === null || this.emaThrust === null || this.lastVoltage === null || !(this.emaPower > 0) || !(this.emaThrust > 0)) return m;
    const zeroPct = 100 * BAND_K * Math.hypot((z.current_A * this.lastVoltage) / this.emaPower, z.thrust_N / this.emaThrust);
    return Math.hypot(m, zeroPct);
  }

  /** Measured grams per watt once the output has held for 1.5 s and thrust is meaningful; else null. */
  private steadyGpw(now: number): number | null {
    if (this.emaThrust === null || this.emaPower === null || this.output <= 0) return null;
    if (now - this.outputChangedAt < 1500 || this.emaThrust < 0.5 || this.emaPower < 1) return null;
    return this.emaThrust / 9.80665e-3 / this.emaPower;
  }
}
