// The sequence run lifecycle as an explicit state machine: one pure transition function, a reason on every
// transition. The runner (runner.ts) feeds it inputs from its tick, the bench controller and the operator.
//
//   idle --start--> preparing --armed--> ramping --ramp_done--> settling --settled | settle_timeout--> measuring
//   measuring --point_done (more)--> ramping        measuring --point_done (last)--> finishing --down--> completed
//   ramping | settling | measuring --too_hot--> cooling --cooled--> ramping (the interrupted step again)
//   cooling --cool_timeout--> aborting
//   active --pause--> pausing --down--> paused --resume--> preparing (re-arm; the interrupted step again)
//   active | paused --abort--> aborting --down--> aborted          (paused is already disarmed: straight to aborted)
//   any live state --cut--> aborted    (emergency cut by the operator: STOP is written before this input)
//   any live state --trip--> tripped   (bench tripped: host interlock or a latched device fault)
//   any live state --lost--> interrupted  (link lost, device disarmed or restarted by itself, a command failed)
//
// "Down" means: throttle ramped to zero and the device disarmed. finishing, pausing and aborting are the three
// ways of getting there, named for where they lead, so the state alone says what happens next.

export type RunState =
  | 'idle'
  | 'preparing'
  | 'ramping'
  | 'settling'
  | 'measuring'
  | 'cooling'
  | 'pausing'
  | 'paused'
  | 'finishing'
  | 'aborting'
  | 'completed'
  | 'aborted'
  | 'tripped'
  | 'interrupted';

export const RUN_STATES: readonly RunState[] = ['idle', 'preparing', 'ramping', 'settling', 'measuring', 'cooling', 'pausing', 'paused', 'finishing', 'aborting', 'completed', 'aborted', 'tripped', 'interrupted'];

export type RunOutcome = 'completed' | 'aborted' | 'tripped' | 'interrupted';

export type RunInput =
  | { kind: 'start'; steps: number }
  | { kind: 'armed' }
  | { kind: 'ramp_done'; step: number; throttle: number }
  | { kind: 'settled'; after_s: number }
  | { kind: 'settle_timeout'; hold_s: number; why: string }
  | { kind: 'point_done'; step: number; last: boolean }
  | { kind: 'too_hot'; temp_c: number; threshold_c: number }
  | { kind: 'cooled'; temp_c: number }
  | { kind: 'cool_timeout'; max_s: number; temp_c: number }
  | { kind: 'pause'; source: string }
  | { kind: 'resume'; source: string }
  | { kind: 'abort'; source: string }
  | { kind: 'cut'; source: string }
  | { kind: 'down'; note?: string }
  | { kind: 'trip'; detail: string }
  | { kind: 'lost'; why: string };

export interface RunTransition {
  from: RunState;
  to: RunState;
  reason: string;
}

const TERMINAL: ReadonlySet<RunState> = new Set(['completed', 'aborted', 'tripped', 'interrupted']);
/** States in which the runner may have the motor energised. */
const SPINNING: ReadonlySet<RunState> = new Set(['ramping', 'settling', 'measuring', 'cooling']);
const WINDING_DOWN: ReadonlySet<RunState> = new Set(['pausing', 'finishing', 'aborting']);

export function isTerminal(s: RunState): s is RunOutcome {
  return TERMINAL.has(s);
}

/** True while the runner is between start and an outcome (it owns the throttle). */
export function isLive(s: RunState): boolean {
  return s !== 'idle' && !TERMINAL.has(s);
}

export function isSpinning(s: RunState): boolean {
  return SPINNING.has(s);
}

export function isWindingDown(s: RunState): boolean {
  return WINDING_DOWN.has(s);
}

/** Returns the transition an input causes, or null when it does not apply in this state. */
export function nextRunState(state: RunState, input: RunInput): RunTransition | null {
  const to = (next: RunState, reason: string): RunTransition | null => (next === state ? null : { from: state, to: next, reason });
  if (isTerminal(state)) return null;
  switch (input.kind) {
    case 'start':
      return state === 'idle' ? to('preparing', `checks passed for ${input.steps} step${input.steps === 1 ? '' : 's'}; arming`) : null;
    case 'armed':
      return state === 'preparing' ? to('ramping', 'device armed at zero throttle') : null;
    case 'ramp_done':
      return state === 'ramping' ? to('settling', `step ${input.step + 1} at throttle ${input.throttle}: waiting for readings to settle`) : null;
    case 'settled':
      return state === 'settling' ? to('measuring', `thrust and current steady after ${input.after_s.toFixed(2)} s`) : null;
    case 'settle_timeout':
      return state === 'settling' ? to('measuring', `not steady within hold_s ${input.hold_s} s (${input.why}); measuring anyway, flagged settled=false`) : null;
    case 'point_done':
      if (state !== 'measuring') return null;
      return input.last ? to('finishing', `step ${input.step + 1} measured, the last one: ramping down`) : to('ramping', `step ${input.step + 1} measured`);
    case 'too_hot':
      return state === 'ramping' || state === 'settling' || state === 'measuring'
        ? to('cooling', `temperature ${input.temp_c.toFixed(1)} degC reached the cool-down threshold ${input.threshold_c.toFixed(1)} degC`)
        : null;
    case 'cooled':
      return state === 'cooling' ? to('ramping', `temperature down to ${input.temp_c.toFixed(1)} degC: repeating the interrupted step`) : null;
    case 'cool_timeout':
      return state === 'cooling' ? to('aborting', `cooling took longer than ${input.max_s} s (still ${input.temp_c.toFixed(1)} degC): giving up`) : null;
    case 'pause':
      return SPINNING.has(state) ? to('pausing', `paused by ${input.source}: ramping down and disarming`) : null;
    case 'resume':
      return state === 'paused' ? to('preparing', `resumed by ${input.source}: arming again`) : null;
    case 'abort':
      if (state === 'idle') return null;
      if (state === 'paused') return to('aborted', `aborted by ${input.source} while paused (already disarmed)`);
      if (state === 'aborting') return null;
      return to('aborting', `aborted by ${input.source}: ramping down and disarming`);
    case 'cut':
      return state === 'idle' ? null : to('aborted', `emergency cut by ${input.source}: stop written to the device`);
    case 'down': {
      const how = input.note ? `throttle zero; ${input.note}` : 'throttle zero and disarmed';
      if (state === 'finishing') return to('completed', `every step measured; ${how}`);
      if (state === 'pausing') return to('paused', how);
      if (state === 'aborting') return to('aborted', how);
      return null;
    }
    case 'trip':
      return state === 'idle' ? null : to('tripped', input.detail);
    case 'lost':
      return state === 'idle' ? null : to('interrupted', input.why);
  }
}
