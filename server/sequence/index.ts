// Guided throttle-step sequences: the file format (schema.ts, SCHEMA.md), its expansion into a flat plan and
// the checks before arming (plan.ts), settle detection (settle.ts), measurement of one operating point
// (measure.ts), the run lifecycle (run-state.ts) and the runner that drives the bench controller (runner.ts).

export { parseSequence, SequenceError, formatIssue, DEFAULT_TIMING, MAX_EXPANDED_STEPS, SEQUENCE_FORMAT_VERSION, type SequenceSpec, type SequenceIssue, type StepItemSpec } from './schema.js';
export { planSequence, checkPlan, assertPlanAllowed, DEFAULT_COOL_DOWN_MAX_S, type PlanLimits } from './plan.js';
export { judgeSettle, judgeSeries, seriesStats, DEFAULT_SETTLE, type SettleVerdict, type SeriesVerdict, type SettleReading } from './settle.js';
export { gramsPerWatt, figureOfMerit, WindowMeasurement, GRAM_FORCE_N, SEA_LEVEL_DENSITY, type MeasureContext } from './measure.js';
export { nextRunState, isLive, isTerminal, isSpinning, isWindingDown, RUN_STATES, type RunState, type RunOutcome, type RunInput, type RunTransition } from './run-state.js';
export {
  SequenceRunner,
  DEFAULT_MAX_SLEW_PER_S,
  DEFAULT_ABORT_SLEW_PER_S,
  DEFAULT_TICK_MS,
  type RunnerBench,
  type RunnerController,
  type RunnerOptions,
  type RunnerEvents,
  type RunProgress,
  type RunResult,
  type RunTrip,
  type RunTransitionEvent,
  type RunView,
} from './runner.js';
export type { PlannedStep, SequencePlan, SettleParams, ChannelSettle, CoolDownParams, PredictFn, RunPoint, StepTiming } from './types.js';

import { parseSequence, SequenceError } from './schema.js';
import { planSequence } from './plan.js';
import type { SequencePlan } from './types.js';

/** Parses JSON text (or an already parsed value) and expands it: the one call a surface needs. */
export function loadSequence(json: unknown): SequencePlan {
  let value = json;
  if (typeof json === 'string') {
    try {
      value = JSON.parse(json) as unknown;
    } catch (err) {
      throw new SequenceError([{ path: '', rule: `not valid JSON: ${(err as Error).message}` }]);
    }
  }
  return planSequence(parseSequence(value));
}
