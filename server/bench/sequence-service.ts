// Sequences started from a dashboard: one runner at a time per daemon, built the way `ductbench run` builds
// it (the rig's ceiling and temperature limit, its disk area for the figure of merit, the model's predictor,
// the bench air density), recorded as one managed session, and reported as views the hub can broadcast.
//
// The service never arms by itself before the runner's checks have passed: a sequence that asks for more than
// the device ceiling or the rig limit is refused with the runner's field-level issues and nothing is sent.

import { readdirSync, readFileSync } from 'node:fs';
import { basename, join } from 'node:path';
import type { BenchEvent, DeviceIdentity, ExampleSequence, RunPointView, SequenceRunView, SequenceSource } from '../api/messages.js';
import type { Limits } from '../interlocks/limits.js';
import type { RigSpec } from '../model/rig-types.js';
import { rigGeometry } from '../model/rig.js';
import { isLive, loadSequence, SequenceError, SequenceRunner, type PredictFn, type RunnerBench, type RunnerOptions, type RunPoint, type RunResult, type SequencePlan } from '../sequence/index.js';
import { TypedEmitter } from '../util/emitter.js';
import { ControlError, type BenchController } from './controller.js';
import type { SessionKeeper } from './recording.js';

export interface LoadedExample extends ExampleSequence {
  plan: SequencePlan;
  /** The document as written, stored with the session. */
  document: unknown;
}

/** Reads every *.json in a folder as a sequence; a file that does not validate is reported and left out. */
export function loadExamples(dir: string, log: (line: string) => void = () => {}): LoadedExample[] {
  let files: string[];
  try {
    files = readdirSync(dir).filter((f) => f.endsWith('.json')).sort();
  } catch {
    return [];
  }
  const out: LoadedExample[] = [];
  for (const f of files) {
    try {
      const document = JSON.parse(readFileSync(join(dir, f), 'utf8')) as unknown;
      const plan = loadSequence(document);
      out.push({
        name: basename(f, '.json'),
        title: plan.name,
        description: plan.description,
        steps: plan.steps.length,
        throttles: plan.steps.map((s) => s.throttle),
        plan,
        document,
      });
    } catch (err) {
      log(`ductbench: example sequence ${f} left out: ${(err as Error).message.split('\n')[0]}`);
    }
  }
  return out;
}

/** The sequence document a staircase form stands for (the same shape `ductbench run --staircase` writes). */
export function staircaseDocument(s: Extract<SequenceSource, { kind: 'staircase' }>): unknown {
  return {
    name: `staircase ${s.start} to ${s.stop} by ${s.step}`,
    steps: [
      {
        staircase: {
          start: s.start,
          stop: s.stop,
          step: s.step,
          hold_s: s.hold_s,
          ...(s.ramp_s !== undefined ? { ramp_s: s.ramp_s } : {}),
          ...(s.window_s !== undefined ? { window_s: s.window_s } : {}),
        },
      },
    ],
  };
}

export interface SequenceServiceDeps {
  controller: BenchController;
  onSample: RunnerBench['onSample'];
  identity: () => DeviceIdentity | null;
  sessions: SessionKeeper | null;
  rig: RigSpec | null;
  limits: Limits;
  predict: PredictFn | null;
  airDensity_kg_m3: number;
  examples: readonly LoadedExample[];
  tell: (e: BenchEvent) => void;
  /** Overrides for the runner (tests: a faster tick). */
  runner?: Partial<RunnerOptions>;
}

export interface StartRequest {
  source: SequenceSource;
  title?: string;
  tags?: string[];
}

/** What a check (or a start) found acceptable: the plan in brief. */
export interface PlanSummary {
  name: string;
  steps: number;
  throttles: number[];
  /** Rough time the run needs, s (ramps at the slew limit, every hold used in full, every window). */
  estimate_s: number;
}

export interface SequenceServiceEvents {
  run: SequenceRunView;
  point: { run: number; point: RunPointView };
}

interface Current {
  n: number;
  runner: SequenceRunner;
  session: number | null;
  started_at: number;
  result: RunResult | null;
}

export class SequenceService extends TypedEmitter<SequenceServiceEvents> {
  private current: Current | null = null;
  private runs = 0;

  constructor(private readonly d: SequenceServiceDeps) {
    super();
  }

  /** The examples as the snapshot lists them. */
  examples(): ExampleSequence[] {
    return this.d.examples.map(({ plan: _p, document: _d, ...e }) => e);
  }

  get live(): boolean {
    return this.current !== null && isLive(this.current.runner.state);
  }

  /** Parses and expands a source; throws SequenceError with field-level issues. */
  planFor(source: SequenceSource): { plan: SequencePlan; document: unknown } {
    switch (source.kind) {
      case 'example': {
        const ex = this.d.examples.find((e) => e.name === source.name);
        if (!ex) throw new SequenceError([{ path: 'source.name', rule: `no example sequence named ${JSON.stringify(source.name)} (known: ${this.d.examples.map((e) => e.name).join(', ') || 'none'})` }]);
        return { plan: ex.plan, document: ex.document };
      }
      case 'staircase': {
        const document = staircaseDocument(source);
        return { plan: loadSequence(document), document };
      }
      case 'json': {
        const plan = loadSequence(source.text);
        return { plan, document: JSON.parse(source.text) as unknown };
      }
    }
  }

  /** Checks against the device, the rig and the bench state without arming; throws SequenceError. */
  check(source: SequenceSource): PlanSummary {
    const { plan } = this.planFor(source);
    const runner = this.makeRunner(plan);
    const issues = runner.check();
    if (issues.length) throw new SequenceError(issues);
    return summarize(plan, this.d.controller.maxSlewPerS);
  }

  /** Checks, opens the session and starts the run. Throws SequenceError (nothing armed) or ControlError. */
  start(req: StartRequest): SequenceRunView {
    if (this.live) throw new ControlError(`a sequence is already running (${this.current!.runner.plan.name}); abort it first`);
    const { plan, document } = this.planFor(req.source);
    const runner = this.makeRunner(plan);
    const issues = runner.check();
    if (issues.length) throw new SequenceError(issues);
    const n = ++this.runs;
    const session = this.d.sessions?.prepare({ title: req.title ?? plan.name, tags: req.tags ?? [], sequence: document, managed: true }) ?? null;
    const cur: Current = { n, runner, session, started_at: Date.now(), result: null };
    this.current = cur;
    runner.on('progress', () => this.emit('run', this.viewOf(cur, false)));
    runner.on('point', (p: RunPoint) => {
      this.d.sessions?.addPoint(p);
      this.emit('point', { run: n, point: p });
    });
    this.d.tell({ t: Date.now(), level: 'info', kind: 'sequence', text: `sequence "${plan.name}" started: ${plan.steps.length} step${plan.steps.length === 1 ? '' : 's'}` });
    runner.start().then(
      (r) => this.finished(cur, r),
      (err: Error) => {
        // start() only rejects on its own checks, which passed a moment ago; treat anything else as lost.
        this.d.tell({ t: Date.now(), level: 'error', kind: 'sequence', text: `sequence "${plan.name}" could not start: ${err.message}` });
        if (this.d.sessions && session !== null && this.d.sessions.sessionId === session) this.d.sessions.finish('interrupted');
        this.emit('run', this.viewOf(cur, false));
      },
    );
    return this.viewOf(cur, false);
  }

  pause(): void {
    if (!this.requireLive().pause('dashboard')) throw new ControlError(`cannot pause while ${this.current!.runner.state}`);
  }

  resume(): void {
    if (!this.requireLive().resume('dashboard')) throw new ControlError(`cannot resume while ${this.current!.runner.state}`);
  }

  /** Operator abort: ramp down and disarm; a second abort while ramping down cuts at once. */
  abort(): void {
    if (!this.requireLive().abort('dashboard')) throw new ControlError(`cannot abort while ${this.current!.runner.state}`);
  }

  /** Emergency: STOP first (the controller), then the run ends as aborted. False when nothing runs. */
  cut(source: string): boolean {
    return this.current ? this.current.runner.cut(source) : false;
  }

  /** The current or last run; with its points for a snapshot. */
  view(withPoints = true): SequenceRunView | null {
    return this.current ? this.viewOf(this.current, withPoints) : null;
  }

  private requireLive(): SequenceRunner {
    if (!this.current || !this.live) throw new ControlError('no sequence is running');
    return this.current.runner;
  }

  private finished(cur: Current, r: RunResult): void {
    cur.result = r;
    // The runner decides the outcome: an aborted sweep that ended disarmed is not "completed".
    if (this.d.sessions && cur.session !== null && this.d.sessions.sessionId === cur.session) this.d.sessions.finish(r.outcome);
    this.d.tell({
      t: Date.now(),
      level: r.outcome === 'completed' ? 'info' : 'warn',
      kind: 'sequence',
      text: `sequence "${r.sequence.name}" ${r.outcome}: ${r.reason} (${r.points.length} of ${r.sequence.steps} points)`,
    });
    this.emit('run', this.viewOf(cur, false));
  }

  private makeRunner(plan: SequencePlan): SequenceRunner {
    const rig = this.d.rig;
    const rigMax = typeof (rig?.limits as Record<string, unknown> | undefined)?.max_throttle === 'number' ? Number((rig!.limits as Record<string, unknown>).max_throttle) : null;
    let diskArea: number | null = null;
    try {
      diskArea = rig ? rigGeometry(rig).diskArea_m2 : null;
    } catch {
      diskArea = null;
    }
    return new SequenceRunner({ controller: this.d.controller, onSample: this.d.onSample, identity: this.d.identity }, plan, {
      rigCeiling: rigMax,
      temperatureLimitC: this.d.limits.max_temp_c,
      diskArea_m2: diskArea,
      airDensity_kg_m3: this.d.airDensity_kg_m3,
      predict: this.d.predict,
      ...this.d.runner,
    });
  }

  private viewOf(cur: Current, withPoints: boolean): SequenceRunView {
    const v = cur.runner.view();
    return {
      run: cur.n,
      name: cur.runner.plan.name,
      session: cur.session,
      state: v.state,
      reason: v.reason,
      live: isLive(v.state),
      progress: { ...v.progress },
      outcome: cur.result?.outcome ?? null,
      started_at: cur.started_at,
      ended_at: cur.result?.ended_at ?? null,
      ...(withPoints ? { points: [...cur.runner.points] } : {}),
    };
  }
}

function summarize(plan: SequencePlan, controllerSlew: number): PlanSummary {
  const slew = Math.min(0.5, plan.maxSlewPerS ?? Infinity, controllerSlew > 0 ? controllerSlew : Infinity);
  let t = 0;
  let from = 0;
  for (const s of plan.steps) {
    t += Math.max(s.ramp_s, Math.abs(s.throttle - from) / slew) + s.hold_s + s.window_s;
    from = s.throttle;
  }
  t += from / slew;
  return { name: plan.name, steps: plan.steps.length, throttles: plan.steps.map((s) => s.throttle), estimate_s: Math.round(t) };
}
