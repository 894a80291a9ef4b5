// Calibration from the dashboard: the CalibrationWorkflows (tare, span, current zero, reference scales, rpm
// pulses) run over the daemon's own link and controller, one job at a time, each result written to the data
// folder's history and made the calibration in force at once (the daemon's telemetry pipeline, which every
// new session records). The span is interactive, so every job is an explicit state machine driven by
// WebSocket messages: the service names the load to place, waits for the operator's "placed", measures,
// reports the reading, and so on until the fit is applied or refused with its reason.
//
// Without a data folder the service refuses, saying so: a calibration kept only in memory would vanish with
// the daemon while sessions went on recording it as if it were the bench's, and the CLI always has a folder.
// An unreadable history file refuses too: writing a new one over it would lose the old history.

import {
  CALIBRATION_HISTORY_SHOWN,
  type BenchEvent,
  type CalibrationAction,
  type CalibrationEntryView,
  type CalibrationFitView,
  type CalibrationHistoryView,
  type CalibrationJobState,
  type CalibrationJobView,
  type CalibrationReadingView,
  type CalibrationStatusView,
  type ClientMessage,
} from '../api/messages.js';
import { fitLine, type SpanLimits } from '../calibration/fit.js';
import { calibrationWarnings, DEFAULT_STALENESS, type CalibrationEntry, type CalibrationHistory, type StalenessRules } from '../calibration/history.js';
import { CalibrationError, CalibrationWorkflows, G0, type CalibrationTarget, type Reading } from '../calibration/workflows.js';
import type { DeviceLink } from '../link/link.js';
import { TypedEmitter } from '../util/emitter.js';
import { identityCalibration, type Calibration, type CalibratedChannel } from './calibration.js';
import { ControlError, type BenchController } from './controller.js';
import type { Sample } from './telemetry.js';

/**
 * A current scale taken from less than this is mostly the sensor's offset and noise (a Hall sensor reads a
 * tenth of an ampere or more at rest): pass a known current through it, e.g. a lab supply into a load
 * resistor with the motor disconnected.
 */
export const MIN_CURRENT_REFERENCE_A = 0.5;
/** A voltage scale from less than this is mostly the divider's offset. */
export const MIN_VOLTAGE_REFERENCE_V = 1;
/** Warnings are re-checked at most this often as temperature readings arrive (ms). */
const RECHECK_MS = 1000;
/** Age is re-checked this often even without temperature readings (ms). */
const AGE_CHECK_MS = 60_000;
/** A temperature change smaller than this is not worth a status message on its own (degC). */
const TEMPERATURE_STEP_C = 0.5;

export type CalibrationMessage = Extract<ClientMessage, { type: `calibration_${string}` }>;

export interface CalibrationServiceDeps {
  link: DeviceLink;
  controller: BenchController;
  /** The data folder's history, or null: then `unavailable` says why nothing can be calibrated. */
  history: CalibrationHistory | null;
  unavailable: string | null;
  /** Makes a calibration the one in force (the daemon's telemetry pipeline). */
  setCalibration: (c: Calibration) => void;
  onSample: (fn: (s: Sample, arrivedAt: number) => void) => () => void;
  tell: (e: BenchEvent) => void;
  /** Measurement windows and span limits (tests use short windows). */
  workflow?: { settleMs?: number; measureSeconds?: number; spanLimits?: SpanLimits };
  staleness?: StalenessRules;
  now?: () => Date;
}

export interface CalibrationServiceEvents {
  status: CalibrationStatusView;
  history: CalibrationHistoryView;
}

// ---------------------------------------------------------------- the job state machine

export type JobEvent =
  /** Span: the operator is asked to place loads_kg[step]. */
  | { kind: 'ask_place'; step: number; reason: string }
  /** The load is in place (span) or the job has started measuring (the others). */
  | { kind: 'measure'; step: number; reason: string }
  | { kind: 'measured'; reading: CalibrationReadingView }
  | { kind: 'applied'; entry: CalibrationEntryView; fit: CalibrationFitView | null; reason: string }
  | { kind: 'refused'; reason: string; fit: CalibrationFitView | null }
  | { kind: 'cancelled'; reason: string }
  | { kind: 'failed'; reason: string };

const LIVE_STATES: readonly CalibrationJobState[] = ['placing', 'measuring'];

/** The one transition function of a job. An event that does not fit the state leaves the job as it is. */
export function nextJob(j: CalibrationJobView, e: JobEvent, now: number): CalibrationJobView {
  if (!j.live) return j;
  const end = (state: CalibrationJobState, reason: string, extra: Partial<CalibrationJobView> = {}): CalibrationJobView => ({ ...j, ...extra, state, reason, live: false, ended_at: now });
  switch (e.kind) {
    case 'ask_place':
      return j.state === 'measuring' && j.action === 'span' && e.step < j.loads_kg.length ? { ...j, state: 'placing', step: e.step, reason: e.reason } : j;
    case 'measure':
      return (j.state === 'placing' && e.step === j.step) || (j.state === 'measuring' && j.action !== 'span') ? { ...j, state: 'measuring', step: e.step, reason: e.reason } : j;
    case 'measured':
      return j.state === 'measuring' ? { ...j, readings: [...j.readings, e.reading] } : j;
    case 'applied':
      return j.state === 'measuring' ? end('applied', e.reason, { entry: e.entry, fit: e.fit }) : j;
    case 'refused':
      return end('refused', e.reason, { fit: e.fit });
    case 'cancelled':
      return end('cancelled', e.reason);
    case 'failed':
      return end('failed', e.reason);
  }
}

function newJob(n: number, action: CalibrationAction, loads: number[], reason: string, now: number): CalibrationJobView {
  return { job: n, action, state: 'measuring', reason, loads_kg: loads, step: 0, readings: [], fit: null, entry: null, live: true, started_at: now, ended_at: null };
}

/** The operator's instruction for one load of a span. */
export function placePrompt(kg: number): string {
  return kg === 0
    ? 'Take everything off the load cell, let it hang still, then confirm'
    : `Hang ${kg} kg on the load cell (on the thrust axis), let it settle and hang free, then confirm`;
}

/** Fit of a span's readings for display; null when no line can be drawn through them. */
export function spanFitView(readings: readonly CalibrationReadingView[]): CalibrationFitView | null {
  try {
    const f = fitLine(readings.map((r) => ({ x: r.raw, y: r.reference })));
    return { scale: f.slope, offset: f.offset, residuals: f.residuals, non_linearity_pct: f.n >= 3 ? f.nonLinearityPct : null, rms: f.rms, r2: f.r2 };
  } catch {
    return null;
  }
}

function entryView(e: CalibrationEntry): CalibrationEntryView {
  return JSON.parse(JSON.stringify(e)) as CalibrationEntryView;
}

/** Thrown inside a job's workflow once the job has ended (cancelled, bench no longer safe): stops it there. */
class Abandoned extends Error {
  override name = 'Abandoned';
}

/** The workflows with each averaged reading reported, and a job that has ended stopped before it records. */
class ObservedWorkflows extends CalibrationWorkflows {
  constructor(
    target: CalibrationTarget,
    history: CalibrationHistory,
    opts: ConstructorParameters<typeof CalibrationWorkflows>[2],
    private readonly observe: (channel: CalibratedChannel, r: Reading) => void,
    private readonly abandoned: () => boolean,
  ) {
    super(target, history, opts);
  }

  override async measure(channel: CalibratedChannel, seconds?: number): Promise<Reading> {
    if (this.abandoned()) throw new Abandoned();
    const r = await super.measure(channel, seconds);
    if (this.abandoned()) throw new Abandoned();
    this.observe(channel, r);
    return r;
  }
}

interface Running {
  view: CalibrationJobView;
  wf: ObservedWorkflows;
  /** Span: the operator's confirmation being waited for. */
  waiting: { step: number; resolve: () => void; reject: (e: Error) => void } | null;
  /** Kind of reading the next measurement stands for. */
  reference: (r: Reading) => { load_kg: number | null; reference: number };
}

const ACTION_LABEL: Record<CalibrationAction, string> = {
  tare: 'tare',
  span: 'span',
  current_zero: 'current zero',
  current_reference: 'current scale',
  voltage_reference: 'voltage scale',
  rpm_pulses: 'rpm pulses',
};

export class CalibrationService extends TypedEmitter<CalibrationServiceEvents> {
  private running: Running | null = null;
  private last: CalibrationJobView | null = null;
  private jobs = 0;
  private temperatureC: number | null = null;
  private warnings: string[] = [];
  private warnedKeys = new Set<string>();
  private lastCheck = 0;
  private lastSentTemperature: number | null = null;
  private readonly offSample: () => void;
  private readonly offBench: () => void;
  private readonly ageTimer: ReturnType<typeof setInterval>;
  private readonly now: () => Date;

  constructor(private readonly d: CalibrationServiceDeps) {
    super();
    this.now = d.now ?? (() => new Date());
    this.warnings = this.computeWarnings();
    // The daemon tells the start-up warnings itself (on the link's ready); only later ones are news here.
    for (const w of this.warnings) this.warnedKeys.add(warningKey(w));
    this.offSample = d.onSample((s) => {
      if (s.temp === null) return;
      this.temperatureC = s.temp;
      if (this.running) this.running.wf.temperatureC = s.temp;
      if (Date.now() - this.lastCheck >= RECHECK_MS) this.recheck();
    });
    this.offBench = d.controller.on('bench', (b) => {
      // A tare is left to end by itself: once the firmware has acknowledged it the cell is zeroed, and the
      // history must say so (it takes well under a second).
      if (this.running && this.running.view.action !== 'tare' && b.state !== 'safe') this.abandon('failed', `the bench left the safe state (${b.state}: ${b.reason}); nothing was applied`);
    });
    this.ageTimer = setInterval(() => this.recheck(), AGE_CHECK_MS);
    this.ageTimer.unref();
  }

  get available(): boolean {
    return this.d.history !== null;
  }

  /** True while a job is live: the bench must stay disarmed until it ends. */
  get busy(): boolean {
    return this.running !== null;
  }

  /** Refuses `what` (arming, a sequence) while a calibration job is live. */
  requireIdle(what: string): void {
    if (this.running) throw new ControlError(`${what} refused: a calibration (${ACTION_LABEL[this.running.view.action]}) is in progress; finish or cancel it first`);
  }

  /** What the snapshot carries (extras.calibration and extras.calibration_history). */
  extras(): { calibration: CalibrationStatusView; calibration_history: CalibrationHistoryView } {
    return { calibration: this.status(), calibration_history: this.historyView() };
  }

  status(): CalibrationStatusView {
    return {
      unavailable: this.d.unavailable ?? (this.d.history ? null : 'no calibration history'),
      job: this.running?.view ?? this.last,
      in_force: this.d.history ? this.d.history.current() : identityCalibration(),
      warnings: [...this.warnings],
      temperature_C: this.temperatureC,
    };
  }

  historyView(): CalibrationHistoryView {
    const all = this.d.history?.all ?? [];
    return { total: all.length, entries: all.slice(-CALIBRATION_HISTORY_SHOWN).map(entryView) };
  }

  /** Handles one calibration message; resolves with the job's view as it starts (the reply's data). */
  async handle(msg: CalibrationMessage): Promise<CalibrationJobView> {
    switch (msg.type) {
      case 'calibration_cancel':
        return this.cancel();
      case 'calibration_span_placed':
        return this.placed(msg.step);
      case 'calibration_tare':
        return this.startTare();
      case 'calibration_span_start':
        return this.startSpan(msg.masses_kg);
      case 'calibration_current_zero':
        return this.startSimple('current_zero', 'Measuring the current sensor with nothing drawing current', (wf) => wf.currentZero(), () => ({ load_kg: null, reference: 0 }));
      case 'calibration_reference': {
        const { channel, reading } = msg;
        const min = channel === 'current' ? MIN_CURRENT_REFERENCE_A : MIN_VOLTAGE_REFERENCE_V;
        const unit = channel === 'current' ? 'A' : 'V';
        if (reading < min) {
          throw new ControlError(
            channel === 'current'
              ? `a current scale needs at least ${min} A through the sensor (a lab supply into a load resistor, motor disconnected); ${reading} A is mostly the sensor's own offset`
              : `a voltage scale needs at least ${min} V on the divider; ${reading} V is mostly its offset`,
          );
        }
        return this.startSimple(
          channel === 'current' ? 'current_reference' : 'voltage_reference',
          `Measuring the ${channel} channel against your meter's ${reading} ${unit}: keep it steady`,
          (wf) => wf.scaleAgainst(channel, reading),
          () => ({ load_kg: null, reference: reading }),
        );
      }
      case 'calibration_rpm_pulses': {
        const { wf, run } = this.begin('rpm_pulses', [], 'Recording the rpm pickup pulses per revolution');
        try {
          const entry = wf.rpmPulses(msg.actual, msg.firmware);
          this.finishApplied(run, entry, null, `rpm pickup set to ${msg.actual} pulses a revolution (firmware counts ${msg.firmware}): rpm scale ${entry.result.scale.toFixed(4)}`);
        } catch (err) {
          this.finishError(run, err);
        }
        return this.last!;
      }
    }
  }

  /** Ends a live job (the daemon closing); nothing it was measuring is applied. */
  close(): void {
    if (this.running) this.abandon('cancelled', 'the daemon is stopping; nothing was applied');
    clearInterval(this.ageTimer);
    this.offSample();
    this.offBench();
  }

  // ---- jobs

  private requireReady(what: string): CalibrationHistory {
    if (!this.d.history) throw new ControlError(`${what} refused: ${this.d.unavailable ?? 'this daemon keeps no calibration history'}`);
    if (this.running) throw new ControlError(`${what} refused: a calibration (${ACTION_LABEL[this.running.view.action]}) is already in progress; finish or cancel it first`);
    if (!this.d.link.isReady) throw new ControlError(`${what} refused: the bench is not connected`);
    const st = this.d.controller.state;
    if (st !== 'safe') throw new ControlError(`${what} refused: calibration only with the bench connected, disarmed and safe (it is ${st})`);
    return this.d.history;
  }

  private begin(action: CalibrationAction, loads: number[], reason: string): { wf: ObservedWorkflows; run: Running } {
    const history = this.requireReady(ACTION_LABEL[action]);
    const view = newJob(++this.jobs, action, loads, reason, Date.now());
    let run: Running;
    const wf = new ObservedWorkflows(
      { link: this.d.link, controller: this.d.controller, setCalibration: (c) => this.d.setCalibration(c) },
      history,
      this.d.workflow ?? {},
      (_ch, r) => {
        const ref = run.reference(r);
        this.apply(run, { kind: 'measured', reading: { load_kg: ref.load_kg, raw: r.mean, std: r.std, n: r.n, reference: ref.reference } });
      },
      () => this.running !== run,
    );
    wf.temperatureC = this.temperatureC;
    run = { view, wf, waiting: null, reference: () => ({ load_kg: null, reference: 0 }) };
    this.running = run;
    this.d.tell({ t: Date.now(), level: 'info', kind: 'calibration', text: `calibration ${ACTION_LABEL[action]} started` });
    this.emitStatus();
    return { wf, run };
  }

  private startTare(): CalibrationJobView {
    return this.startSimple('tare', 'Zeroing the load cell: nothing on it, propeller still', (wf) => wf.tare(), () => ({ load_kg: 0, reference: 0 }));
  }

  private startSimple(
    action: CalibrationAction,
    reason: string,
    work: (wf: ObservedWorkflows) => Promise<CalibrationEntry>,
    reference: (r: Reading) => { load_kg: number | null; reference: number },
  ): CalibrationJobView {
    const { wf, run } = this.begin(action, [], reason);
    run.reference = reference;
    work(wf).then(
      (entry) => this.finishApplied(run, entry, null, describeApplied(entry)),
      (err: unknown) => this.finishError(run, err),
    );
    return run.view;
  }

  private startSpan(masses: readonly number[]): CalibrationJobView {
    const loads = masses.includes(0) ? [...masses] : [0, ...masses];
    const { wf, run } = this.begin('span', loads, 'Starting the span');
    let next = 0;
    let current = 0;
    run.reference = () => ({ load_kg: loads[current], reference: loads[current] * G0 });
    const place = (kg: number): Promise<void> =>
      new Promise<void>((resolve, reject) => {
        if (this.running !== run) return reject(new Abandoned());
        current = next++;
        if (loads[current] !== kg) return reject(new Error(`span asked for ${kg} kg at step ${current}, expected ${loads[current]} kg`));
        run.waiting = { step: current, resolve, reject };
        this.apply(run, { kind: 'ask_place', step: current, reason: placePrompt(kg) });
      });
    // The workflow starts in 'measuring' (the job's initial state); the first place() moves it to 'placing'.
    wf.span(masses, place).then(
      (entry) => {
        const fit = spanFitView(run.view.readings);
        const nl = entry.nonLinearityPct !== undefined && loads.length >= 3 ? `, non-linearity ${entry.nonLinearityPct.toFixed(3)} % of span` : '';
        this.finishApplied(run, entry, fit, `span applied: scale ${entry.result.scale.toFixed(5)}, offset ${entry.result.offset.toFixed(4)} N${nl}`);
      },
      (err: unknown) => this.finishError(run, err, spanFitView(run.view.readings)),
    );
    return run.view;
  }

  private placed(step: number): CalibrationJobView {
    const run = this.running;
    if (!run || run.view.action !== 'span') throw new ControlError('no span is waiting for a load');
    if (!run.waiting) throw new ControlError(`the span is measuring step ${run.view.step + 1}; wait for the next instruction`);
    if (run.waiting.step !== step) throw new ControlError(`the span is waiting for step ${run.waiting.step} (${run.view.loads_kg[run.waiting.step]} kg), not step ${step}`);
    const w = run.waiting;
    run.waiting = null;
    const kg = run.view.loads_kg[step];
    this.apply(run, { kind: 'measure', step, reason: kg === 0 ? 'Measuring the empty load cell: keep the bench still' : `Measuring ${kg} kg: keep the bench still` });
    w.resolve();
    return run.view;
  }

  private cancel(): CalibrationJobView {
    const run = this.running;
    if (!run) throw new ControlError('no calibration is in progress');
    // The firmware's tare cannot be called back once sent; it ends by itself in well under a second.
    if (run.view.action === 'tare') throw new ControlError('a tare cannot be cancelled; it ends by itself in a moment');
    this.abandon('cancelled', 'cancelled by the operator; nothing was applied');
    return this.last!;
  }

  private abandon(state: 'cancelled' | 'failed', reason: string): void {
    const run = this.running;
    if (!run) return;
    this.apply(run, { kind: state, reason });
    run.waiting?.reject(new Abandoned());
    run.waiting = null;
    this.end(run, 'warn');
  }

  private finishApplied(run: Running, entry: CalibrationEntry, fit: CalibrationFitView | null, reason: string): void {
    if (this.running !== run) return;
    this.apply(run, { kind: 'applied', entry: entryView(entry), fit, reason });
    this.end(run, 'info');
    this.emit('history', this.historyView());
    this.recheck(true);
  }

  private finishError(run: Running, err: unknown, fit: CalibrationFitView | null = null): void {
    if (this.running !== run || err instanceof Abandoned) return;
    const refusal = err instanceof CalibrationError || err instanceof ControlError;
    const msg = err instanceof Error ? err.message : String(err);
    this.apply(run, refusal ? { kind: 'refused', reason: `${msg}; nothing was applied`, fit } : { kind: 'failed', reason: `${msg}; nothing was applied` });
    this.end(run, 'warn');
  }

  private end(run: Running, level: 'info' | 'warn'): void {
    this.last = run.view;
    this.running = null;
    this.d.tell({ t: Date.now(), level, kind: 'calibration', text: `calibration ${ACTION_LABEL[run.view.action]} ${run.view.state}: ${run.view.reason}` });
    this.emitStatus();
  }

  private apply(run: Running, e: JobEvent): void {
    const next = nextJob(run.view, e, Date.now());
    if (next === run.view) return;
    run.view = next;
    if (this.running === run || !next.live) this.emitStatus();
  }

  // ---- warnings

  private computeWarnings(): string[] {
    if (!this.d.history) return [];
    return calibrationWarnings(this.d.history, this.now(), this.temperatureC, this.d.staleness ?? DEFAULT_STALENESS);
  }

  /** Re-checks age and temperature; tells the operator of a warning not seen before, broadcasts on change. */
  private recheck(force = false): void {
    this.lastCheck = Date.now();
    const w = this.computeWarnings();
    const changed = w.length !== this.warnings.length || w.some((x, i) => x !== this.warnings[i]);
    this.warnings = w;
    const keys = new Set(w.map(warningKey));
    for (const text of w) {
      if (!this.warnedKeys.has(warningKey(text))) this.d.tell({ t: Date.now(), level: 'warn', kind: 'calibration', text });
    }
    this.warnedKeys = keys;
    const t = this.temperatureC;
    const moved = t !== null && (this.lastSentTemperature === null || Math.abs(t - this.lastSentTemperature) >= TEMPERATURE_STEP_C);
    if (changed || moved || force) this.emitStatus();
  }

  private emitStatus(): void {
    this.lastSentTemperature = this.temperatureC;
    this.emit('status', this.status());
  }
}

/** The same warning with other numbers (a temperature moving on) is not a new warning. */
function warningKey(text: string): string {
  return text.replace(/-?\d+(\.\d+)?/g, '#');
}

function describeApplied(e: CalibrationEntry): string {
  switch (e.kind) {
    case 'tare':
      return 'load cell zeroed in the firmware; the host thrust offset is back to 0';
    case 'zero':
      return `current zero applied: offset ${e.result.offset.toFixed(4)} A`;
    case 'scale':
      return `${e.channel} scale applied: ${e.result.scale.toFixed(5)} (reading ${e.points?.[0]?.raw.toFixed(3) ?? '?'} against ${e.points?.[0]?.reference ?? '?'})`;
    default:
      return `${e.channel} ${e.kind} applied`;
  }
}
