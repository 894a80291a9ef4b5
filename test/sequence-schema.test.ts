// Sequence files: validation with field paths and rules, expansion of the generators into a flat plan, and
// the ceiling checks that refuse a plan before anything is armed.

import { readdirSync, readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { checkPlan, loadSequence, parseSequence, planSequence, SequenceError, formatIssue, MAX_EXPANDED_STEPS, type SequenceIssue } from '../server/sequence/index.js';

function issuesOf(fn: () => unknown): SequenceIssue[] {
  try {
    fn();
  } catch (err) {
    if (err instanceof SequenceError) return [...err.issues];
    throw err;
  }
  throw new Error('expected a SequenceError');
}

const paths = (issues: SequenceIssue[]) => issues.map((i) => i.path);

describe('sequence validation', () => {
  it('accepts a minimal file and fills in the built-in timing', () => {
    const plan = loadSequence({ name: 'one', steps: [{ throttle: 0.3 }] });
    expect(plan.steps).toHaveLength(1);
    expect(plan.steps[0]).toMatchObject({ index: 0, throttle: 0.3, ramp_s: 1, hold_s: 5, window_s: 2, origin: 'steps[0].throttle', direction: null, label: null, pass: [] });
    expect(plan.coolDown).toBeNull();
    expect(plan.settle.window_s).toBe(0.5);
  });

  it('reports unknown keys with their path, at every level', () => {
    const issues = issuesOf(() =>
      parseSequence({
        name: 'typos',
        hold: 3,
        settle: { window: 0.5 },
        steps: [{ throttle: 0.2, hold: 2 }, { staircase: { start: 0.1, stop: 0.3, step: 0.1, windows_s: 1 } }],
      }),
    );
    expect(paths(issues)).toEqual(['hold', 'settle.window', 'steps[0].hold', 'steps[1].staircase.windows_s']);
    expect(issues[2].rule).toMatch(/unknown key \(allowed: throttle, label, ramp_s, hold_s, window_s\)/);
  });

  it('collects every problem in one pass, each with the rule it broke', () => {
    const issues = issuesOf(() =>
      parseSequence({
        name: '',
        version: 2,
        max_slew_per_s: 0,
        steps: [{ throttle: 1.2 }, { throttle: '0.5' }, { throttle: 0.4, window_s: 0.1 }, {}, { staircase: { start: 0.1, stop: 0.8, step: 0.3 } }],
      }),
    );
    const text = issues.map(formatIssue);
    expect(text).toContain('version: must be 1 (got 2)');
    expect(text).toContain('name: must not be empty');
    expect(text).toContain('max_slew_per_s: 0 /s must be above 0 /s and at most 10 /s');
    expect(text).toContain('steps[0].throttle: 1.2 is outside 0..1');
    expect(text).toContain('steps[1].throttle: must be a finite number, got the string "0.5"');
    expect(text).toContain('steps[2].window_s: 0.1 s is outside 0.2..600 s');
    expect(text.some((t) => t.startsWith('steps[3].throttle: is required'))).toBe(true);
    expect(text).toContain('steps[4].staircase.step: (stop - start) / step = 2.3333 is not a whole number of steps');
  });

  it('rejects malformed generators', () => {
    const issues = issuesOf(() =>
      parseSequence({
        name: 'gens',
        steps: [
          { staircase: { start: 0.3, stop: 0.3, step: 0.1 } },
          { up_down: { start: 0.5, peak: 0.4, step: 0.1 } },
          { repeat: { times: 1.5, steps: [{ throttle: 0.2 }] } },
          { repeat: { times: 2, steps: [] } },
          { staircase: { start: 0.1, stop: 0.2, step: 0.1 }, up_down: { start: 0.1, peak: 0.2, step: 0.1 } },
          'fast',
        ],
      }),
    );
    expect(paths(issues)).toEqual(['steps[0].staircase.stop', 'steps[1].up_down.peak', 'steps[2].repeat.times', 'steps[3].repeat.steps', 'steps[4]', 'steps[5]']);
  });

  it('limits repeat nesting', () => {
    const deep = { repeat: { times: 2, steps: [{ repeat: { times: 2, steps: [{ repeat: { times: 2, steps: [{ repeat: { times: 2, steps: [{ throttle: 0.1 }] } }] } }] } }] } };
    const issues = issuesOf(() => parseSequence({ name: 'deep', steps: [deep] }));
    expect(paths(issues)).toEqual(['steps[0].repeat.steps[0].repeat.steps[0].repeat.steps[0].repeat']);
  });

  it('checks the cool-down hysteresis against its own limit', () => {
    const issues = issuesOf(() => parseSequence({ name: 'hot', cool_down: { limit_c: 80, margin_c: 10, throttle: 0.1, resume_below_c: 75 }, steps: [{ throttle: 0.2 }] }));
    expect(issues.map(formatIssue)).toEqual(['cool_down.resume_below_c: must be below limit_c - margin_c (70 degC), or the run would cool and heat without end']);
  });

  it('refuses a hold shorter than the settle window (it could never settle)', () => {
    const issues = issuesOf(() => loadSequence({ name: 'short', settle: { window_s: 1 }, steps: [{ throttle: 0.2, hold_s: 0.5 }, { staircase: { start: 0.3, stop: 0.5, step: 0.1, hold_s: 0.8 } }] }));
    expect(paths(issues)).toEqual(['steps[0].hold_s', 'steps[1].staircase.hold_s']);
    expect(issues[0].rule).toBe('0.5 s is shorter than the settle window (settle.window_s = 1 s)');
    // an inherited hold is reported where it is written, once
    const inherited = issuesOf(() => loadSequence({ name: 'd', defaults: { hold_s: 0.4 }, steps: [{ throttle: 0.2 }, { up_down: { start: 0.1, peak: 0.3, step: 0.1 } }] }));
    expect(inherited.map(formatIssue)).toEqual(['defaults.hold_s: 0.4 s is shorter than the settle window (settle.window_s = 0.5 s)']);
    expect(paths(issuesOf(() => loadSequence({ name: 'b', settle: { window_s: 6 }, steps: [{ throttle: 0.2 }] })))).toEqual(['defaults.hold_s']);
  });

  it('reports text that is not JSON as a sequence error', () => {
    const issues = issuesOf(() => loadSequence('{"name": "x", steps: []}'));
    expect(issues[0].path).toBe('');
    expect(issues[0].rule).toMatch(/^not valid JSON/);
  });
});

describe('expansion', () => {
  it('walks a staircase up, landing exactly on the grid and on stop', () => {
    const plan = loadSequence({ name: 's', defaults: { hold_s: 3 }, steps: [{ staircase: { start: 0.1, stop: 0.8, step: 0.1, window_s: 1 } }] });
    expect(plan.steps.map((s) => s.throttle)).toEqual([0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8]);
    expect(plan.steps.map((s) => s.index)).toEqual([0, 1, 2, 3, 4, 5, 6, 7]);
    // own window_s, inherited hold_s, built-in ramp_s
    expect(plan.steps.every((s) => s.window_s === 1 && s.hold_s === 3 && s.ramp_s === 1)).toBe(true);
    expect(plan.steps[0].origin).toBe('steps[0].staircase.start');
    expect(plan.steps[7].origin).toBe('steps[0].staircase.stop');
  });

  it('walks a staircase down when stop is below start', () => {
    const plan = loadSequence({ name: 'down', steps: [{ staircase: { start: 0.6, stop: 0.3, step: 0.15 } }] });
    expect(plan.steps.map((s) => s.throttle)).toEqual([0.6, 0.45, 0.3]);
  });

  it('goes up and down for hysteresis, peak once, each point tagged with its direction', () => {
    const plan = loadSequence({ name: 'h', steps: [{ up_down: { start: 0.2, peak: 0.5, step: 0.1 } }] });
    expect(plan.steps.map((s) => s.throttle)).toEqual([0.2, 0.3, 0.4, 0.5, 0.4, 0.3, 0.2]);
    expect(plan.steps.map((s) => s.direction)).toEqual(['up', 'up', 'up', 'up', 'down', 'down', 'down']);
  });

  it('repeats nested items, recording the pass of each enclosing repeat', () => {
    const plan = loadSequence({
      name: 'r',
      steps: [{ throttle: 0.1, label: 'warm' }, { repeat: { times: 2, steps: [{ throttle: 0.3 }, { repeat: { times: 2, steps: [{ throttle: 0.5, label: 'top' }] } }] } }],
    });
    expect(plan.steps.map((s) => s.throttle)).toEqual([0.1, 0.3, 0.5, 0.5, 0.3, 0.5, 0.5]);
    expect(plan.steps.map((s) => s.pass)).toEqual([[], [0], [0, 0], [0, 1], [1], [1, 0], [1, 1]]);
    expect(plan.steps.map((s) => s.label)).toEqual(['warm', null, 'top', 'top', null, 'top', 'top']);
    expect(plan.steps[2].origin).toBe('steps[1].repeat.steps[1].repeat.steps[0].throttle');
  });

  it('refuses plans that expand beyond the step cap', () => {
    const issues = issuesOf(() => loadSequence({ name: 'huge', steps: [{ repeat: { times: 100, steps: [{ staircase: { start: 0, stop: 1, step: 0.1 } }] } }] }));
    expect(issues).toEqual([{ path: 'steps', rule: `expands to more than ${MAX_EXPANDED_STEPS} steps` }]);
  });
});

describe('checks before arming', () => {
  const plan = loadSequence({ name: 'c', steps: [{ throttle: 0.2 }, { throttle: 0.4 }, { throttle: 0.6 }, { throttle: 0.95 }] });

  it('refuses a step above the rig ceiling, naming the field, never clamping', () => {
    const issues = checkPlan(plan, { deviceCeiling: 1, rigCeiling: 0.9 });
    expect(issues.map(formatIssue)).toEqual(["steps[3].throttle: 0.95 is above the rig's ceiling 0.9 (refused, never clamped)"]);
    expect(plan.steps[3].throttle).toBe(0.95);
  });

  it('names the device ceiling when it is the lower one', () => {
    expect(checkPlan(plan, { deviceCeiling: 0.5, rigCeiling: 0.8 }).map(formatIssue)).toEqual([
      "steps[2].throttle: 0.6 is above the device's ceiling 0.5 (refused, never clamped)",
      "steps[3].throttle: 0.95 is above the device's ceiling 0.5 (refused, never clamped)",
    ]);
    expect(checkPlan(plan, { deviceCeiling: 0.95 })).toEqual([]);
  });

  it('points a staircase that climbs over the ceiling at its stop, once', () => {
    const p = loadSequence({ name: 's', steps: [{ staircase: { start: 0.5, stop: 1, step: 0.1 } }] });
    expect(checkPlan(p, { deviceCeiling: 0.9 }).map(formatIssue)).toEqual(["steps[0].staircase.stop: 1 is above the device's ceiling 0.9 (refused, never clamped)"]);
    const down = loadSequence({ name: 'd', steps: [{ up_down: { start: 0.2, peak: 0.95, step: 0.25 } }] });
    expect(checkPlan(down, { deviceCeiling: 0.9 }).map((i) => i.path)).toEqual(['steps[0].up_down.peak']);
  });

  it('refuses when no device ceiling is known (not connected)', () => {
    expect(checkPlan(plan, { deviceCeiling: 0 })[0].rule).toMatch(/no throttle ceiling/);
  });

  it('checks the cool-down throttle, its limit and the temperature channel', () => {
    const p = loadSequence({ name: 'cd', cool_down: { margin_c: 10, throttle: 0.92, resume_below_c: 60 }, steps: [{ throttle: 0.3 }] });
    expect(checkPlan(p, { deviceCeiling: 0.9, hasTemperature: false }).map(formatIssue)).toEqual([
      "cool_down.throttle: 0.92 is above the device's ceiling 0.9 (refused, never clamped)",
      'cool_down.limit_c: is required when the rig gives no temperature limit',
      'cool_down: needs a temperature channel, and the device reports none',
    ]);
    expect(checkPlan(p, { deviceCeiling: 1, temperatureLimitC: 65, hasTemperature: true }).map(formatIssue)).toEqual([
      'cool_down.resume_below_c: must be below the limit minus the margin (55 degC)',
    ]);
    expect(checkPlan(p, { deviceCeiling: 1, temperatureLimitC: 90, hasTemperature: true })).toEqual([]);
  });
});

describe('example sequences', () => {
  const dir = new URL('../examples/sequences/', import.meta.url);
  const files = readdirSync(dir).filter((f) => f.endsWith('.json'));

  it('there are examples', () => {
    expect(files.length).toBeGreaterThanOrEqual(3);
  });

  for (const f of files) {
    it(`${f} is valid and runs within a 0.9 ceiling`, () => {
      const plan = loadSequence(readFileSync(new URL(f, dir), 'utf8'));
      expect(plan.steps.length).toBeGreaterThan(0);
      expect(checkPlan(plan, { deviceCeiling: 0.9, temperatureLimitC: 90, hasTemperature: true })).toEqual([]);
    });
  }

  it('the ten-step staircase has ten steps ending at 0.9', () => {
    const plan = loadSequence(readFileSync(new URL('staircase-10-steps.json', dir), 'utf8'));
    expect(plan.steps).toHaveLength(10);
    expect(plan.steps[9].throttle).toBe(0.9);
  });
});

it('planSequence is what loadSequence does after parsing', () => {
  const doc = { name: 'same', steps: [{ up_down: { start: 0.1, peak: 0.3, step: 0.1 } }] };
  expect(planSequence(parseSequence(doc))).toEqual(loadSequence(JSON.stringify(doc)));
});
