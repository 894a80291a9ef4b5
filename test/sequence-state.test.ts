// The run lifecycle's transition function: the paths a run takes, what each state refuses, and that the
// outcomes are final.

import { describe, expect, it } from 'vitest';
import { isLive, isTerminal, nextRunState, RUN_STATES, type RunInput, type RunState } from '../server/sequence/index.js';

const ALL_INPUTS: RunInput[] = [
  { kind: 'start', steps: 3 },
  { kind: 'armed' },
  { kind: 'ramp_done', step: 0, throttle: 0.2 },
  { kind: 'settled', after_s: 0.6 },
  { kind: 'settle_timeout', hold_s: 3, why: 'thrust slope' },
  { kind: 'point_done', step: 0, last: false },
  { kind: 'point_done', step: 2, last: true },
  { kind: 'too_hot', temp_c: 80, threshold_c: 78 },
  { kind: 'cooled', temp_c: 50 },
  { kind: 'cool_timeout', max_s: 600, temp_c: 79 },
  { kind: 'pause', source: 'test' },
  { kind: 'resume', source: 'test' },
  { kind: 'abort', source: 'test' },
  { kind: 'cut', source: 'test' },
  { kind: 'down' },
  { kind: 'trip', detail: 'max_current' },
  { kind: 'lost', why: 'link lost' },
];

function walk(inputs: RunInput[]): RunState[] {
  let s: RunState = 'idle';
  const seen: RunState[] = [s];
  for (const i of inputs) {
    const tr = nextRunState(s, i);
    if (!tr) throw new Error(`${i.kind} refused in ${s}`);
    s = tr.to;
    seen.push(s);
  }
  return seen;
}

describe('run state machine', () => {
  it('walks a two-step run to completed', () => {
    expect(
      walk([
        { kind: 'start', steps: 2 },
        { kind: 'armed' },
        { kind: 'ramp_done', step: 0, throttle: 0.2 },
        { kind: 'settled', after_s: 0.5 },
        { kind: 'point_done', step: 0, last: false },
        { kind: 'ramp_done', step: 1, throttle: 0.4 },
        { kind: 'settle_timeout', hold_s: 2, why: 'x' },
        { kind: 'point_done', step: 1, last: true },
        { kind: 'down' },
      ]),
    ).toEqual(['idle', 'preparing', 'ramping', 'settling', 'measuring', 'ramping', 'settling', 'measuring', 'finishing', 'completed']);
  });

  it('pauses through a ramp-down to paused, resumes by arming again, and cools back into the same step', () => {
    expect(
      walk([
        { kind: 'start', steps: 2 },
        { kind: 'armed' },
        { kind: 'pause', source: 'op' },
        { kind: 'down' },
        { kind: 'resume', source: 'op' },
        { kind: 'armed' },
        { kind: 'ramp_done', step: 0, throttle: 0.2 },
        { kind: 'too_hot', temp_c: 80, threshold_c: 78 },
        { kind: 'cooled', temp_c: 50 },
      ]),
    ).toEqual(['idle', 'preparing', 'ramping', 'pausing', 'paused', 'preparing', 'ramping', 'settling', 'cooling', 'ramping']);
  });

  it('aborts through a ramp-down, except from paused where it is already disarmed', () => {
    expect(walk([{ kind: 'start', steps: 1 }, { kind: 'armed' }, { kind: 'abort', source: 'op' }, { kind: 'down' }]).slice(-2)).toEqual(['aborting', 'aborted']);
    expect(walk([{ kind: 'start', steps: 1 }, { kind: 'armed' }, { kind: 'pause', source: 'op' }, { kind: 'down' }, { kind: 'abort', source: 'op' }]).at(-1)).toBe('aborted');
    // pause, then abort while still ramping down: the ramp-down now leads to aborted
    expect(walk([{ kind: 'start', steps: 1 }, { kind: 'armed' }, { kind: 'pause', source: 'op' }, { kind: 'abort', source: 'op' }, { kind: 'down' }]).slice(-3)).toEqual([
      'pausing',
      'aborting',
      'aborted',
    ]);
  });

  it('ends in tripped or interrupted from every live state, and aborted on a cut', () => {
    for (const s of RUN_STATES.filter(isLive)) {
      expect(nextRunState(s, { kind: 'trip', detail: 'x' })?.to).toBe('tripped');
      expect(nextRunState(s, { kind: 'lost', why: 'x' })?.to).toBe('interrupted');
      expect(nextRunState(s, { kind: 'cut', source: 'x' })?.to).toBe('aborted');
    }
  });

  it('outcomes are final: no input leaves them', () => {
    for (const s of RUN_STATES.filter(isTerminal)) for (const i of ALL_INPUTS) expect(nextRunState(s, i)).toBeNull();
  });

  it('idle only starts', () => {
    const moves = ALL_INPUTS.filter((i) => nextRunState('idle', i) !== null).map((i) => i.kind);
    expect(moves).toEqual(['start']);
  });

  it('measuring and settling do not take inputs meant for other phases', () => {
    expect(nextRunState('settling', { kind: 'point_done', step: 0, last: false })).toBeNull();
    expect(nextRunState('measuring', { kind: 'settled', after_s: 1 })).toBeNull();
    expect(nextRunState('paused', { kind: 'pause', source: 'x' })).toBeNull();
    expect(nextRunState('cooling', { kind: 'too_hot', temp_c: 1, threshold_c: 0 })).toBeNull();
    expect(nextRunState('ramping', { kind: 'resume', source: 'x' })).toBeNull();
  });

  it('every transition carries a reason', () => {
    for (const s of RUN_STATES) {
      for (const i of ALL_INPUTS) {
        const tr = nextRunState(s, i);
        if (tr) {
          expect(tr.from).toBe(s);
          expect(tr.to).not.toBe(s);
          expect(tr.reason.length).toBeGreaterThan(5);
        }
      }
    }
  });
});
