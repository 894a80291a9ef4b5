// From a validated sequence file to the flat list of steps the runner walks, and the checks that must pass
// before anything spins: every throttle (steps and cool-down) at or below the device's announced ceiling and
// the rig's own limit. Above either, the run is refused; values are never clamped, because a clamped
// sequence measures something other than what its author asked for.

import { DEFAULT_TIMING, MAX_EXPANDED_STEPS, SequenceError, staircaseValues, type SequenceIssue, type SequenceSpec, type StepItemSpec, type TimingFields } from './schema.js';
import { DEFAULT_SETTLE } from './settle.js';
import type { ChannelSettle, PlannedStep, SequencePlan, SettleParams, StepTiming } from './types.js';

export const DEFAULT_COOL_DOWN_MAX_S = 600;

interface BaseTiming extends StepTiming {
  /** Where an inherited hold_s comes from, for error messages. */
  holdOrigin: string;
}

function resolveTiming(own: TimingFields, inherited: BaseTiming, path: string): StepTiming & { holdOrigin: string } {
  return {
    ramp_s: own.ramp_s ?? inherited.ramp_s,
    hold_s: own.hold_s ?? inherited.hold_s,
    window_s: own.window_s ?? inherited.window_s,
    holdOrigin: own.hold_s !== undefined ? `${path}.hold_s` : inherited.holdOrigin,
  };
}

type Draft = Omit<PlannedStep, 'index'> & { holdOrigin: string };

function expandItems(items: readonly StepItemSpec[], path: string, base: BaseTiming, pass: number[], out: Draft[]): void {
  items.forEach((item, i) => {
    const p = `${path}[${i}]`;
    if ('staircase' in item) {
      const s = item.staircase;
      const t = resolveTiming(s, base, `${p}.staircase`);
      const values = staircaseValues(s.start, s.stop, s.step) as number[];
      const bound = s.stop >= s.start ? { origin: `${p}.staircase.stop`, originValue: s.stop } : { origin: `${p}.staircase.start`, originValue: s.start };
      values.forEach((v, k) => {
        const o = k === 0 ? { origin: `${p}.staircase.start`, originValue: s.start } : bound;
        out.push({ throttle: v, ...t, ...o, direction: null, label: null, pass: [...pass] });
      });
    } else if ('up_down' in item) {
      const s = item.up_down;
      const t = resolveTiming(s, base, `${p}.up_down`);
      const up = staircaseValues(s.start, s.peak, s.step) as number[];
      const peak = { origin: `${p}.up_down.peak`, originValue: s.peak };
      up.forEach((v, k) => out.push({ throttle: v, ...t, ...(k === 0 ? { origin: `${p}.up_down.start`, originValue: s.start } : peak), direction: 'up', label: null, pass: [...pass] }));
      for (let k = up.length - 2; k >= 0; k--) {
        out.push({ throttle: up[k], ...t, ...(k === 0 ? { origin: `${p}.up_down.start`, originValue: s.start } : peak), direction: 'down', label: null, pass: [...pass] });
      }
    } else if ('repeat' in item) {
      for (let r = 0; r < item.repeat.times; r++) {
        expandItems(item.repeat.steps, `${p}.repeat.steps`, base, [...pass, r], out);
        // Checked as we go so a huge repeat of a huge staircase never builds its whole list.
        if (out.length > MAX_EXPANDED_STEPS) return;
      }
    } else {
      out.push({ throttle: item.throttle, ...resolveTiming(item, base, p), origin: `${p}.throttle`, originValue: item.throttle, direction: null, label: item.label ?? null, pass: [...pass] });
    }
  });
}

function settleParams(spec: SequenceSpec): SettleParams {
  const s = spec.settle ?? {};
  const ch = (d: ChannelSettle, o: Partial<ChannelSettle> | undefined): ChannelSettle => ({ ...d, ...(o ?? {}) });
  return {
    window_s: s.window_s ?? DEFAULT_SETTLE.window_s,
    min_samples: s.min_samples ?? DEFAULT_SETTLE.min_samples,
    thrust: ch(DEFAULT_SETTLE.thrust, s.thrust),
    current: ch(DEFAULT_SETTLE.current, s.current),
  };
}

/** Expands generators into the flat step list. Throws SequenceError for plans that cannot be run as written. */
export function planSequence(spec: SequenceSpec): SequencePlan {
  const base = resolveTiming(spec.defaults ?? {}, { ...DEFAULT_TIMING, holdOrigin: 'defaults.hold_s' }, 'defaults');
  const drafts: Draft[] = [];
  expandItems(spec.steps, 'steps', base, [], drafts);
  const issues: SequenceIssue[] = [];
  if (drafts.length > MAX_EXPANDED_STEPS) issues.push({ path: 'steps', rule: `expands to more than ${MAX_EXPANDED_STEPS} steps` });
  const settle = settleParams(spec);
  // hold_s is the longest settle wait; shorter than the settle window, the criterion could never be met.
  const seen = new Set<string>();
  for (const d of drafts) {
    if (d.hold_s < settle.window_s && !seen.has(d.holdOrigin)) {
      seen.add(d.holdOrigin);
      issues.push({ path: d.holdOrigin, rule: `${d.hold_s} s is shorter than the settle window (settle.window_s = ${settle.window_s} s)` });
    }
  }
  const steps: PlannedStep[] = drafts.map(({ holdOrigin: _h, ...d }, index) => ({ index, ...d }));
  if (issues.length) throw new SequenceError(issues);
  const cd = spec.cool_down;
  return {
    name: spec.name,
    description: spec.description ?? null,
    steps,
    settle,
    coolDown: cd ? { limit_c: cd.limit_c ?? null, margin_c: cd.margin_c, throttle: cd.throttle, resume_below_c: cd.resume_below_c, max_s: cd.max_s ?? DEFAULT_COOL_DOWN_MAX_S } : null,
    maxSlewPerS: spec.max_slew_per_s ?? null,
  };
}

export interface PlanLimits {
  /** Ceiling the device announced in its identity (identity.throttleCeiling). */
  deviceCeiling: number;
  /** The rig's own throttle limit, when it has one. */
  rigCeiling?: number | null;
  /** The rig's motor temperature limit, degC, when it has one (for a cool-down that names none). */
  temperatureLimitC?: number | null;
  /** Whether the device reports a temperature channel (a cool-down needs one). */
  hasTemperature?: boolean;
}

/**
 * Checks a plan against the device and the rig. Returns every issue (empty: the plan may run). Run before
 * arming: a refusal here means nothing was armed and nothing spun.
 */
export function checkPlan(plan: SequencePlan, limits: PlanLimits): SequenceIssue[] {
  const issues: SequenceIssue[] = [];
  const dev = limits.deviceCeiling;
  const rig = limits.rigCeiling ?? null;
  if (!(dev > 0)) issues.push({ path: '', rule: 'the device announced no throttle ceiling (not connected?)' });
  // The binding limit is the lower one; name it, so the message says which file to look at.
  const binding = rig !== null && rig < dev ? { value: rig, who: "rig's ceiling" } : { value: dev, who: "device's ceiling" };
  const over = (path: string, v: number) => issues.push({ path, rule: `${v} is above the ${binding.who} ${binding.value} (refused, never clamped)` });
  const reported = new Set<string>();
  for (const s of plan.steps) {
    if (s.throttle > binding.value && !reported.has(s.origin)) {
      reported.add(s.origin);
      over(s.origin, s.originValue);
    }
  }
  const cd = plan.coolDown;
  if (cd) {
    if (cd.throttle > binding.value) over('cool_down.throttle', cd.throttle);
    const limit = cd.limit_c ?? limits.temperatureLimitC ?? null;
    if (limit === null) issues.push({ path: 'cool_down.limit_c', rule: 'is required when the rig gives no temperature limit' });
    else if (!(cd.resume_below_c < limit - cd.margin_c)) {
      issues.push({ path: 'cool_down.resume_below_c', rule: `must be below the limit minus the margin (${limit - cd.margin_c} degC)` });
    }
    if (limits.hasTemperature === false) issues.push({ path: 'cool_down', rule: 'needs a temperature channel, and the device reports none' });
  }
  return issues;
}

/** Throws SequenceError when checkPlan finds anything. */
export function assertPlanAllowed(plan: SequencePlan, limits: PlanLimits): void {
  const issues = checkPlan(plan, limits);
  if (issues.length) throw new SequenceError(issues);
}
