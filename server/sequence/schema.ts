// Sequence files: the declarative description of a guided throttle-step run (see SCHEMA.md beside this file).
//
// A sequence is configuration that moves a motor, so it is validated completely before anything else happens:
// every problem is collected with the path of the field and the rule it broke, unknown keys are errors (a
// misspelt "hold_s" must not silently fall back to a default), and nothing is ever clamped into range.

import type { StepTiming } from './types.js';

export const SEQUENCE_FORMAT_VERSION = 1;

/** Built-in step timing when neither the step nor the sequence's `defaults` give one. */
export const DEFAULT_TIMING: Readonly<StepTiming> = Object.freeze({ ramp_s: 1, hold_s: 5, window_s: 2 });

/** Most steps one sequence may expand to (a typo in a staircase step must not plan a week of running). */
export const MAX_EXPANDED_STEPS = 1000;
/** Deepest nesting of `repeat` inside `repeat`. */
export const MAX_REPEAT_DEPTH = 3;
const MAX_SECONDS = 600;

export interface SequenceIssue {
  /** Path of the offending field, e.g. "steps[3].throttle"; "" for the whole document. */
  path: string;
  /** What is wrong, for people. */
  rule: string;
}

export function formatIssue(i: SequenceIssue): string {
  return i.path ? `${i.path}: ${i.rule}` : i.rule;
}

/** The sequence file (or the plan) is not acceptable; nothing was started. */
export class SequenceError extends Error {
  override readonly name: string = 'SequenceError';
  constructor(readonly issues: readonly SequenceIssue[]) {
    super(issues.map(formatIssue).join('\n'));
  }
}

// ------------------------------------------------------------------ the document as written

export interface TimingFields {
  /** Seconds to move from the previous throttle to this one (longer when the slew limit says so). */
  ramp_s?: number;
  /** Longest wait for the readings to settle before measuring anyway (the point is then flagged settled=false). */
  hold_s?: number;
  /** Seconds of measurement once settled. */
  window_s?: number;
}

export interface ExplicitStepSpec extends TimingFields {
  throttle: number;
  label?: string;
}

export interface StaircaseSpec extends TimingFields {
  start: number;
  stop: number;
  step: number;
}

export interface UpDownSpec extends TimingFields {
  start: number;
  peak: number;
  step: number;
}

export interface RepeatSpec {
  times: number;
  steps: StepItemSpec[];
}

export type StepItemSpec = ExplicitStepSpec | { staircase: StaircaseSpec } | { up_down: UpDownSpec } | { repeat: RepeatSpec };

export interface ChannelSettleSpec {
  /** Standard deviation must be below max(std_abs, std_rel * |mean|). */
  std_abs?: number;
  std_rel?: number;
  /** Regression slope must be below max(slope_abs, slope_rel * |mean|) per second. */
  slope_abs?: number;
  slope_rel?: number;
}

export interface SettleSpec {
  window_s?: number;
  min_samples?: number;
  thrust?: ChannelSettleSpec;
  current?: ChannelSettleSpec;
}

export interface CoolDownSpec {
  /** Temperature limit in degC; when left out, the rig's limit is used (the run is refused if there is none). */
  limit_c?: number;
  /** Cool down when the temperature is within this many degC of the limit. */
  margin_c: number;
  /** Throttle to hold while cooling (0 stops the propeller but stays armed). */
  throttle: number;
  /** Resume when the temperature has fallen below this, degC. */
  resume_below_c: number;
  /** Give up (abort the run) when cooling takes longer than this; default 600 s. */
  max_s?: number;
}

export interface SequenceSpec {
  version?: number;
  name: string;
  description?: string;
  defaults?: TimingFields;
  settle?: SettleSpec;
  /** Highest throttle change per second during ramps (the runner's own limit may be lower). */
  max_slew_per_s?: number;
  cool_down?: CoolDownSpec;
  steps: StepItemSpec[];
}

// ------------------------------------------------------------------ validation

type Obj = Record<string, unknown>;

class Checker {
  readonly issues: SequenceIssue[] = [];

  fail(path: string, rule: string): void {
    this.issues.push({ path, rule });
  }

  object(x: unknown, path: string, allowed: readonly string[]): Obj | null {
    if (typeof x !== 'object' || x === null || Array.isArray(x)) {
      this.fail(path, `must be an object, got ${describe(x)}`);
      return null;
    }
    for (const key of Object.keys(x)) {
      if (!allowed.includes(key)) this.fail(join(path, key), `unknown key (allowed: ${allowed.join(', ')})`);
    }
    return x as Obj;
  }

  /** A finite number within lo..hi (inclusive unless told), or undefined when optional and absent. */
  number(o: Obj, path: string, key: string, req: boolean, lo: number, hi: number, opts: { loOpen?: boolean; int?: boolean; unit?: string } = {}): number | undefined {
    const p = join(path, key);
    const v = o[key];
    if (v === undefined) {
      if (req) this.fail(p, 'is required');
      return undefined;
    }
    if (typeof v !== 'number' || !Number.isFinite(v)) {
      this.fail(p, `must be a finite number, got ${describe(v)}`);
      return undefined;
    }
    if (opts.int && !Number.isInteger(v)) {
      this.fail(p, `must be a whole number (got ${v})`);
      return undefined;
    }
    const u = opts.unit ?? '';
    const loOk = opts.loOpen ? v > lo : v >= lo;
    if (!loOk || v > hi) {
      this.fail(p, opts.loOpen ? `${v}${u} must be above ${lo}${u} and at most ${hi}${u}` : `${v}${u} is outside ${lo}..${hi}${u}`);
      return undefined;
    }
    return v;
  }

  string(o: Obj, path: string, key: string, req: boolean, maxLen: number): string | undefined {
    const p = join(path, key);
    const v = o[key];
    if (v === undefined) {
      if (req) this.fail(p, 'is required');
      return undefined;
    }
    if (typeof v !== 'string') {
      this.fail(p, `must be a string, got ${describe(v)}`);
      return undefined;
    }
    if (req && v.trim() === '') {
      this.fail(p, 'must not be empty');
      return undefined;
    }
    if (v.length > maxLen) {
      this.fail(p, `must be at most ${maxLen} characters`);
      return undefined;
    }
    return v;
  }
}

function describe(x: unknown): string {
  if (x === null) return 'null';
  if (Array.isArray(x)) return 'an array';
  if (typeof x === 'number') return String(x);
  if (typeof x === 'string') return `the string ${JSON.stringify(x.length > 20 ? x.slice(0, 20) + '...' : x)}`;
  return typeof x;
}

export function join(path: string, key: string): string {
  return path ? `${path}.${key}` : key;
}

const TIMING_KEYS = ['ramp_s', 'hold_s', 'window_s'] as const;

function timing(c: Checker, o: Obj, path: string, out: TimingFields): void {
  const ramp = c.number(o, path, 'ramp_s', false, 0, MAX_SECONDS, { unit: ' s' });
  const hold = c.number(o, path, 'hold_s', false, 0, MAX_SECONDS, { loOpen: true, unit: ' s' });
  const win = c.number(o, path, 'window_s', false, 0.2, MAX_SECONDS, { unit: ' s' });
  if (ramp !== undefined) out.ramp_s = ramp;
  if (hold !== undefined) out.hold_s = hold;
  if (win !== undefined) out.window_s = win;
}

function parseItems(c: Checker, x: unknown, path: string, depth: number): StepItemSpec[] {
  if (!Array.isArray(x)) {
    c.fail(path, x === undefined ? 'is required' : `must be an array of steps, got ${describe(x)}`);
    return [];
  }
  if (x.length === 0) c.fail(path, 'must have at least one step');
  const out: StepItemSpec[] = [];
  x.forEach((item, i) => {
    const p = `${path}[${i}]`;
    if (typeof item !== 'object' || item === null || Array.isArray(item)) {
      c.fail(p, `must be an object (a step, or one of staircase, up_down, repeat), got ${describe(item)}`);
      return;
    }
    const keys = Object.keys(item);
    const gen = keys.filter((k) => k === 'staircase' || k === 'up_down' || k === 'repeat');
    if (gen.length > 1) {
      c.fail(p, `give one of staircase, up_down, repeat per step item, not ${gen.join(' and ')}`);
      return;
    }
    if (gen.length === 1) {
      const kind = gen[0];
      const o = c.object(item, p, [kind]);
      if (!o) return;
      const parsed = kind === 'repeat' ? parseRepeat(c, o.repeat, `${p}.repeat`, depth) : kind === 'staircase' ? parseStaircase(c, o.staircase, `${p}.staircase`) : parseUpDown(c, o.up_down, `${p}.up_down`);
      if (parsed) out.push(parsed);
      return;
    }
    const o = c.object(item, p, ['throttle', 'label', ...TIMING_KEYS]);
    if (!o) return;
    if (!('throttle' in o)) {
      c.fail(`${p}.throttle`, 'is required (or give a generator: staircase, up_down, repeat)');
      return;
    }
    const throttle = c.number(o, p, 'throttle', true, 0, 1);
    const step: ExplicitStepSpec = { throttle: throttle ?? NaN };
    timing(c, o, p, step);
    const label = c.string(o, p, 'label', false, 80);
    if (label !== undefined) step.label = label;
    if (throttle !== undefined) out.push(step);
  });
  return out;
}

/** Steps of a staircase from start to stop (either direction), or an issue when the grid does not close. */
export function staircaseValues(start: number, stop: number, step: number): number[] | string {
  const n = Math.abs(stop - start) / step;
  const whole = Math.round(n);
  if (Math.abs(n - whole) > 1e-6) return `(stop - start) / step = ${+n.toFixed(4)} is not a whole number of steps`;
  if (whole + 1 > MAX_EXPANDED_STEPS) return `${whole + 1} steps is more than ${MAX_EXPANDED_STEPS}`;
  const dir = stop >= start ? 1 : -1;
  const out: number[] = [];
  // Rounded to the protocol's 4 decimals so 0.1 + 2 * 0.1 is 0.3, not 0.30000000000000004.
  for (let k = 0; k <= whole; k++) out.push(Math.round((start + dir * k * step) * 1e4) / 1e4);
  return out;
}

function parseStaircase(c: Checker, x: unknown, p: string): StepItemSpec | null {
  const o = c.object(x, p, ['start', 'stop', 'step', ...TIMING_KEYS]);
  if (!o) return null;
  const start = c.number(o, p, 'start', true, 0, 1);
  const stop = c.number(o, p, 'stop', true, 0, 1);
  const step = c.number(o, p, 'step', true, 0.001, 1);
  const spec: StaircaseSpec = { start: start ?? NaN, stop: stop ?? NaN, step: step ?? NaN };
  timing(c, o, p, spec);
  if (start === undefined || stop === undefined || step === undefined) return null;
  if (start === stop) {
    c.fail(`${p}.stop`, 'must differ from start (use a plain step for one throttle)');
    return null;
  }
  const v = staircaseValues(start, stop, step);
  if (typeof v === 'string') {
    c.fail(`${p}.step`, v);
    return null;
  }
  return { staircase: spec };
}

function parseUpDown(c: Checker, x: unknown, p: string): StepItemSpec | null {
  const o = c.object(x, p, ['start', 'peak', 'step', ...TIMING_KEYS]);
  if (!o) return null;
  const start = c.number(o, p, 'start', true, 0, 1);
  const peak = c.number(o, p, 'peak', true, 0, 1);
  const step = c.number(o, p, 'step', true, 0.001, 1);
  const spec: UpDownSpec = { start: start ?? NaN, peak: peak ?? NaN, step: step ?? NaN };
  timing(c, o, p, spec);
  if (start === undefined || peak === undefined || step === undefined) return null;
  if (!(peak > start)) {
    c.fail(`${p}.peak`, `must be above start (${start})`);
    return null;
  }
  const v = staircaseValues(start, peak, step);
  if (typeof v === 'string') {
    c.fail(`${p}.step`, v);
    return null;
  }
  return { up_down: spec };
}

function parseRepeat(c: Checker, x: unknown, p: string, depth: number): StepItemSpec | null {
  const o = c.object(x, p, ['times', 'steps']);
  if (!o) return null;
  if (depth >= MAX_REPEAT_DEPTH) {
    c.fail(p, `repeat nested deeper than ${MAX_REPEAT_DEPTH} levels`);
    return null;
  }
  const times = c.number(o, p, 'times', true, 1, 100, { int: true });
  const steps = parseItems(c, o.steps, `${p}.steps`, depth + 1);
  if (times === undefined) return null;
  return { repeat: { times, steps } };
}

function parseChannelSettle(c: Checker, x: unknown, p: string, unit: string): ChannelSettleSpec | undefined {
  if (x === undefined) return undefined;
  const o = c.object(x, p, ['std_abs', 'std_rel', 'slope_abs', 'slope_rel']);
  if (!o) return undefined;
  const out: ChannelSettleSpec = {};
  const sa = c.number(o, p, 'std_abs', false, 0, 1000, { unit });
  const sr = c.number(o, p, 'std_rel', false, 0, 1);
  const la = c.number(o, p, 'slope_abs', false, 0, 1000, { unit: `${unit}/s` });
  const lr = c.number(o, p, 'slope_rel', false, 0, 10, { unit: ' /s' });
  if (sa !== undefined) out.std_abs = sa;
  if (sr !== undefined) out.std_rel = sr;
  if (la !== undefined) out.slope_abs = la;
  if (lr !== undefined) out.slope_rel = lr;
  return out;
}

/**
 * Validates a parsed JSON sequence. Throws SequenceError listing every problem (path and rule). Ceilings are
 * not known here: they are checked against the device and the rig when the run is planned (see plan.ts).
 */
export function parseSequence(json: unknown): SequenceSpec {
  const c = new Checker();
  const o = c.object(json, '', ['version', 'name', 'description', 'defaults', 'settle', 'max_slew_per_s', 'cool_down', 'steps']);
  if (!o) throw new SequenceError(c.issues);
  if (o.version !== undefined && o.version !== SEQUENCE_FORMAT_VERSION) c.fail('version', `must be ${SEQUENCE_FORMAT_VERSION} (got ${describe(o.version)})`);
  const name = c.string(o, '', 'name', true, 200);
  const description = c.string(o, '', 'description', false, 2000);
  const spec: SequenceSpec = { name: name ?? '', steps: [] };
  if (o.version !== undefined) spec.version = SEQUENCE_FORMAT_VERSION;
  if (description !== undefined) spec.description = description;

  if (o.defaults !== undefined) {
    const d = c.object(o.defaults, 'defaults', TIMING_KEYS);
    if (d) {
      spec.defaults = {};
      timing(c, d, 'defaults', spec.defaults);
    }
  }

  if (o.settle !== undefined) {
    const s = c.object(o.settle, 'settle', ['window_s', 'min_samples', 'thrust', 'current']);
    if (s) {
      const settle: SettleSpec = {};
      const w = c.number(s, 'settle', 'window_s', false, 0.1, 10, { unit: ' s' });
      const m = c.number(s, 'settle', 'min_samples', false, 2, 10000, { int: true });
      if (w !== undefined) settle.window_s = w;
      if (m !== undefined) settle.min_samples = m;
      const th = parseChannelSettle(c, s.thrust, 'settle.thrust', ' N');
      const cu = parseChannelSettle(c, s.current, 'settle.current', ' A');
      if (th) settle.thrust = th;
      if (cu) settle.current = cu;
      spec.settle = settle;
    }
  }

  const slew = c.number(o, '', 'max_slew_per_s', false, 0, 10, { loOpen: true, unit: ' /s' });
  if (slew !== undefined) spec.max_slew_per_s = slew;

  if (o.cool_down !== undefined) {
    const p = 'cool_down';
    const cd = c.object(o.cool_down, p, ['limit_c', 'margin_c', 'throttle', 'resume_below_c', 'max_s']);
    if (cd) {
      const limit = c.number(cd, p, 'limit_c', false, -40, 250, { unit: ' degC' });
      const margin = c.number(cd, p, 'margin_c', true, 0, 100, { loOpen: true, unit: ' degC' });
      const thr = c.number(cd, p, 'throttle', true, 0, 1);
      const resume = c.number(cd, p, 'resume_below_c', true, -40, 250, { unit: ' degC' });
      const maxS = c.number(cd, p, 'max_s', false, 0, 3600, { loOpen: true, unit: ' s' });
      if (limit !== undefined && margin !== undefined && resume !== undefined && !(resume < limit - margin)) {
        c.fail(`${p}.resume_below_c`, `must be below limit_c - margin_c (${limit - margin} degC), or the run would cool and heat without end`);
      }
      if (margin !== undefined && thr !== undefined && resume !== undefined) {
        spec.cool_down = { margin_c: margin, throttle: thr, resume_below_c: resume };
        if (limit !== undefined) spec.cool_down.limit_c = limit;
        if (maxS !== undefined) spec.cool_down.max_s = maxS;
      }
    }
  }

  spec.steps = parseItems(c, o.steps, 'steps', 0);
  if (c.issues.length) throw new SequenceError(c.issues);
  return spec;
}
