// The zero step of every run, and the zero's drift over it. Before a sequence starts or the bench is armed by
// hand, the thrust is read at rest for a short window (zero.ts judges it): steady, it becomes the zero (the
// telemetry pipeline takes it off every following reading); not steady, the start is refused with the reason
// and nothing arms. The operator may keep the earlier zero instead (a run that must share a zero with the one
// before it); the session then says so. Whatever happened is written into the session the run opens.
//
// Once the run is over (a sequence ended, or a hand-armed bench disarmed) the thrust at rest is read again,
// waiting for the rotor to stop: the difference from the zero is the drift over the run. It is written into
// the run's session, which is tagged when the drift is larger than a fraction of the run's thrust range. A
// new run's own zero reading comes first when it starts before the post-run reading is done (it is the same
// at-rest reading, taken before the new zero).
//
// The zero lives on the host, on top of the calibration: the firmware's own TARE is a calibration action with
// a dated history (calibration-service.ts), and a firmware that lacks it still gets a zero here. A new
// calibration (a span, a firmware tare) resets the host zero to 0: it has its own offset.

import type { BenchEvent, ZeroDriftView, ZeroReadingView, ZeroStepState, ZeroView } from '../api/messages.js';
import type { StoredEvent } from '../store/types.js';
import { TypedEmitter } from '../util/emitter.js';
import { ControlError, type BenchController } from './controller.js';
import type { Sample } from './telemetry.js';
import { DEFAULT_ZERO_RULES, judgeDrift, judgeRest, type RestReading, type RestVerdict, type ZeroRules } from './zero.js';

export interface ZeroServiceDeps {
  controller: Pick<BenchController, 'state' | 'on'>;
  onSample(fn: (s: Sample) => void): () => void;
  /** The offset taken off calibrated thrust now (N), and setting it (the daemon's telemetry pipeline). */
  getOffset(): number;
  setOffset(offset_N: number): void;
  tell(e: BenchEvent): void;
  /** A thrust the stand is expected to reach (predicted at full throttle), for the relative limits; or null. */
  scale_N: number | null;
  rules?: Partial<ZeroRules>;
}

/** What a run's session is told about its zero, and what the post-run reading is judged from. */
export interface ZeroRecord {
  mode: 'tared' | 'kept' | 'none';
  offset_N: number;
  previous_offset_N: number;
  /** When the offset in force was taken (host ms), or null when none ever was. */
  offset_at: number | null;
  reading: ZeroReadingView | null;
  /** Thrust at rest in the zero in force after the step (0 when tared): the post-run reading is compared with it. */
  baseline_N: number | null;
  text: string;
}

export interface ZeroDriftRecord {
  session: number | null;
  view: ZeroDriftView;
  event: StoredEvent;
}

export interface ZeroServiceEvents {
  status: ZeroView;
  /** A post-run check has ended (read or not): the daemon writes it into the run's session. */
  drift: ZeroDriftRecord;
}

/** Tag put on a session whose zero drifted more than the rules allow. */
export const ZERO_DRIFT_TAG = 'zero-drift';

interface Track {
  zero: ZeroRecord | null;
  session: number | null;
  /** Sequence runs end by `afterRun()`; a hand-armed bench ends when it is disarmed. */
  managed: boolean;
  armed: boolean;
  min: number;
  max: number;
}

interface AfterJob {
  track: Track;
}

function readingView(v: RestVerdict): ZeroReadingView {
  return { mean_N: v.mean_N, std_N: v.std_N, slope_N_per_s: v.slope_N_per_s, n: v.n, window_s: v.window_s, rpm_max: v.rpm_max, steady: v.steady, why: v.why };
}

const f3 = (x: number): string => (Number.isFinite(x) ? x.toFixed(3) : '?');

export class ZeroService extends TypedEmitter<ZeroServiceEvents> {
  readonly rules: ZeroRules;
  private stateValue: ZeroStepState = 'none';
  private reasonValue = 'no run yet in this daemon session';
  private offsetAt: number | null = null;
  private lastReading: ZeroReadingView | null = null;
  private lastAfter: ZeroDriftView | null = null;
  private checking = false;
  /** The zero of the run about to start, for the session it opens. */
  private next: ZeroRecord | null = null;
  private track: Track | null = null;
  private after: AfterJob | null = null;
  private closed = false;
  /** Host time of the last disarm (ms), or 0. */
  private disarmedAt = 0;
  private readonly offs: (() => void)[] = [];

  constructor(private readonly d: ZeroServiceDeps) {
    super();
    this.rules = { ...DEFAULT_ZERO_RULES, ...d.rules };
    this.offs.push(
      d.onSample((s) => {
        const tr = this.track;
        if (!tr || !tr.armed || s.thrust === null || !Number.isFinite(s.thrust)) return;
        if (s.thrust < tr.min) tr.min = s.thrust;
        if (s.thrust > tr.max) tr.max = s.thrust;
      }),
      d.controller.on('transition', (tr) => this.onTransition(tr.from, tr.to)),
    );
  }

  /** True while the zero step reads the thrust (nothing else may start then). */
  get busy(): boolean {
    return this.checking;
  }

  view(): ZeroView {
    return {
      state: this.stateValue,
      reason: this.reasonValue,
      offset_N: this.d.getOffset(),
      at: this.offsetAt,
      reading: this.lastReading,
      after: this.lastAfter,
      drift_fraction: this.rules.drift_fraction,
    };
  }

  /**
   * The zero step before `what` (a sequence, an arm). Reads the thrust at rest; tares on a steady reading, or
   * throws ControlError with the reason (nothing is armed). With `keep`, the earlier zero stays in force and
   * the reading is only recorded. `managed`: the run ends by afterRun() (a sequence), not by the next disarm.
   */
  async beforeRun(what: string, opts: { keep?: boolean; managed?: boolean } = {}): Promise<ZeroRecord> {
    if (this.checking) throw new ControlError(`${what} refused: the zero step of another start is in progress`);
    const st = this.d.controller.state;
    if (st !== 'safe') throw new ControlError(`${what} refused: the zero step needs the bench connected and disarmed (it is ${st})`);
    this.checking = true;
    // The post-run reading of the last run, if still waiting, is this same reading (taken before the new zero).
    const pending = this.after;
    this.after = null;
    this.setState('checking', opts.keep ? `reading the thrust at rest before ${what} (keeping the earlier zero)` : `reading the thrust at rest before ${what}: keep the stand and the propeller still`);
    let v: RestVerdict;
    try {
      // Straight after a run the rotor may still be coasting: wait for it rather than refuse.
      const deadline = Date.now() + this.rules.after_wait_s * 1000;
      for (;;) {
        v = await this.read();
        const coasting = v.turning || Date.now() - this.disarmedAt < this.rules.spin_down_s * 1000;
        if (v.steady || !coasting || Date.now() >= deadline || this.d.controller.state !== 'safe' || this.closed) break;
      }
    } finally {
      this.checking = false;
    }
    if (pending) this.finishAfter(pending, v, 'the next run started');
    this.lastReading = readingView(v);
    const previous = this.d.getOffset();
    const now = Date.now();
    if (this.d.controller.state !== 'safe') {
      const why = `${what} refused: the bench left the safe state during the zero step (it is ${this.d.controller.state})`;
      this.setState('refused', why);
      throw new ControlError(why);
    }
    let record: ZeroRecord;
    if (opts.keep) {
      const age = this.offsetAt === null ? 'none was taken in this daemon session' : `taken ${new Date(this.offsetAt).toISOString()}`;
      record = {
        mode: 'kept',
        offset_N: previous,
        previous_offset_N: previous,
        offset_at: this.offsetAt,
        reading: this.lastReading,
        baseline_N: v.steady ? v.mean_N : null,
        text: `zero kept by request (not re-zeroed): offset ${f3(previous)} N (${age}); thrust at rest now ${f3(v.mean_N)} N${v.steady ? '' : ` and not steady (${v.why})`}`,
      };
      this.setState('kept', record.text);
    } else {
      if (!v.steady) {
        const why = `${what} refused: ${v.why}`;
        this.setState('refused', why);
        this.d.tell({ t: now, level: 'warn', kind: 'zero', text: why });
        throw new ControlError(why);
      }
      const offset = previous + v.mean_N;
      this.d.setOffset(offset);
      this.offsetAt = now;
      record = {
        mode: 'tared',
        offset_N: offset,
        previous_offset_N: previous,
        offset_at: now,
        reading: this.lastReading,
        baseline_N: 0,
        text: `zeroed before ${what}: offset ${f3(offset)} N (was ${f3(previous)} N; at rest ${f3(v.mean_N)} N, spread ${f3(v.std_N)} N over ${v.window_s} s, ${v.n} readings)`,
      };
      this.setState('tared', record.text);
    }
    this.d.tell({ t: now, level: record.mode === 'kept' ? 'warn' : 'info', kind: 'zero', text: record.text });
    this.next = record;
    this.track = { zero: record, session: null, managed: opts.managed ?? false, armed: false, min: Infinity, max: -Infinity };
    return record;
  }

  /**
   * A session was opened for the run about to start: the events to write into it first (what the zero
   * step did, or that there was none).
   */
  sessionOpened(id: number): StoredEvent[] {
    const rec = this.next;
    this.next = null;
    if (!this.track || this.track.session !== null) this.track = { zero: rec, session: null, managed: false, armed: false, min: Infinity, max: -Infinity };
    this.track.session = id;
    const t = Date.now();
    if (!rec) {
      return [{ t, level: 'warn', kind: 'zero', text: `not zeroed before this run (armed without the zero step); thrust offset in force ${f3(this.d.getOffset())} N`, data: { mode: 'none', offset_N: this.d.getOffset(), offset_at: this.offsetAt } }];
    }
    return [{ t, level: rec.mode === 'kept' ? 'warn' : 'info', kind: 'zero', text: rec.text, data: { ...rec } }];
  }

  /** A sequence run ended (whatever its outcome): read the zero again once the bench is at rest. */
  afterRun(): void {
    const tr = this.track;
    if (!tr || !tr.managed) return;
    this.track = null;
    this.startAfter(tr);
  }

  /** The calibration in force changed (a span, a firmware tare): it carries its own offset. */
  resetOffset(why: string): void {
    if (this.d.getOffset() === 0 && this.offsetAt === null) return;
    this.d.setOffset(0);
    this.offsetAt = null;
    this.setState('none', `host zero reset to 0: ${why}`);
  }

  /** Resolves once no post-run reading is pending (the CLI waits for it before it closes the daemon). */
  async settled(): Promise<void> {
    while (this.after && !this.closed) await new Promise((r) => setTimeout(r, 50));
  }

  close(): void {
    this.closed = true;
    this.after = null;
    for (const off of this.offs.splice(0)) off();
  }

  // ---- the post-run reading

  private onTransition(from: string, to: string): void {
    if (to === 'safe' || to === 'tripped') this.disarmedAt = Date.now();
    if (to === 'armed' && from === 'safe') {
      if (this.after) {
        const job = this.after;
        this.after = null;
        this.endAfter(job, { state: 'not_read', reason: 'the bench was armed again before the thrust at rest was read' });
      }
      this.track ??= { zero: null, session: null, managed: false, armed: false, min: Infinity, max: -Infinity };
      this.track.armed = true;
      return;
    }
    const tr = this.track;
    if (!tr || !tr.armed || tr.managed) return;
    if (to === 'safe' && (from === 'armed' || from === 'running')) {
      this.track = null;
      this.startAfter(tr);
    } else if (to === 'tripped' || to === 'disconnected') {
      this.track = null;
      this.endAfter({ track: tr }, { state: 'not_read', reason: `the run ended ${to}: the zero was not read again` });
    }
  }

  private startAfter(track: Track): void {
    const job: AfterJob = { track };
    this.after = job;
    this.lastAfter = { state: 'checking', reason: 'waiting for the rotor to stop to read the thrust at rest again', session: track.session, drift_N: null, range_N: null, fraction: null, limit_N: null, warned: false, at: Date.now() };
    this.emit('status', this.view());
    void this.runAfter(job);
  }

  private async runAfter(job: AfterJob): Promise<void> {
    const deadline = Date.now() + this.rules.after_wait_s * 1000;
    let last: RestVerdict | null = null;
    for (;;) {
      if (this.after !== job || this.closed) return;
      const st = this.d.controller.state;
      if (st !== 'safe') {
        this.after = null;
        this.endAfter(job, { state: 'not_read', reason: `the bench is ${st}: the zero was not read again` });
        return;
      }
      last = await this.read();
      if (this.after !== job || this.closed) return;
      if (last.steady || Date.now() >= deadline) break;
    }
    this.after = null;
    this.finishAfter(job, last, null);
  }

  private finishAfter(job: AfterJob, v: RestVerdict, by: string | null): void {
    if (!v.steady) {
      this.endAfter(job, { state: 'not_read', reason: `thrust at rest after the run not steady within ${this.rules.after_wait_s} s (${v.why})${by ? `; ${by}` : ''}` });
      return;
    }
    const tr = job.track;
    const baseline = tr.zero?.baseline_N ?? 0;
    const drift = v.mean_N - baseline;
    const range = Number.isFinite(tr.max - tr.min) ? tr.max - tr.min : 0;
    const j = judgeDrift(drift, range, this.rules);
    const pct = j.fraction === null ? 'no thrust range to judge against' : `${(j.fraction * 100).toFixed(2)} % of the run's thrust range ${range.toFixed(2)} N`;
    const base = tr.zero ? '' : ' (no zero step before this run: from the zero in force)';
    const reason = j.warned
      ? `zero drifted ${f3(drift)} N over the run${base}: ${pct}, above the ${(this.rules.drift_fraction * 100).toFixed(1)} % allowed (${f3(j.limit_N)} N); the run's low points are off by as much`
      : `zero drift ${f3(drift)} N over the run${base}: ${pct}, within ${f3(j.limit_N)} N`;
    this.endAfter(job, { state: 'read', reason, drift_N: drift, range_N: range, fraction: j.fraction, limit_N: j.limit_N, warned: j.warned }, v);
  }

  private endAfter(job: AfterJob, r: Partial<ZeroDriftView> & Pick<ZeroDriftView, 'state' | 'reason'>, v: RestVerdict | null = null): void {
    const t = Date.now();
    const view: ZeroDriftView = { session: job.track.session, drift_N: null, range_N: null, fraction: null, limit_N: null, warned: false, ...r, at: t };
    this.lastAfter = view;
    const level = view.warned ? 'warn' : view.state === 'read' ? 'info' : 'warn';
    const event: StoredEvent = { t, level, kind: 'zero_drift', text: view.reason, data: { ...view, reading: v ? readingView(v) : null } };
    this.d.tell({ t, level, kind: 'zero_drift', text: view.session !== null ? `session ${view.session}: ${view.reason}` : view.reason });
    this.emit('drift', { session: view.session, view, event });
    this.emit('status', this.view());
  }

  // ---- readings

  /** Thrust and rpm over one window of the rules. */
  private read(): Promise<RestVerdict> {
    const rows: RestReading[] = [];
    const off = this.d.onSample((s) => rows.push({ t: s.t, thrust: s.thrust, rpm: s.rpm }));
    return new Promise((resolve) => {
      setTimeout(() => {
        off();
        resolve(judgeRest(rows, this.rules, this.d.scale_N));
      }, this.rules.window_s * 1000);
    });
  }

  private setState(state: ZeroStepState, reason: string): void {
    this.stateValue = state;
    this.reasonValue = reason;
    this.emit('status', this.view());
  }
}
