// The one declaration of the WebSocket API between the daemon and the dashboard (path /ws, JSON text frames).
// Both sides import these types; the validator below is the only way a client message enters the daemon.
// Pure module: no I/O, safe to import in the browser.

import type { FaultCode } from '../../firmware-protocol/src/messages.js';
import type { OperatingPoint } from '../bench/operating-point.js';
import { MAX_PART_NAME, PART_KINDS, type MountRequest, type PartKind } from '../parts/types.js';

export const API_VERSION = 1;

/** Bench lifecycle. One transition function owns it (server/bench/state.ts). */
export type BenchState = 'disconnected' | 'connecting' | 'safe' | 'armed' | 'running' | 'tripped';

export type LinkStatus = 'idle' | 'opening' | 'handshaking' | 'ready' | 'reconnecting' | 'closed';

export type LinkErrorKind = 'disconnected' | 'open_failed' | 'not_a_ductbench_device' | 'protocol_mismatch' | 'handshake_timeout';

/** Channels of a calibrated sample as the daemon streams them. `power` is derived (voltage x current). */
export const SAMPLE_CHANNELS = ['thrust', 'voltage', 'current', 'power', 'rpm', 'temp', 'torque', 'out'] as const;
export type SampleChannel = (typeof SAMPLE_CHANNELS)[number];

export const CHANNEL_UNITS: Record<SampleChannel, string> = {
  thrust: 'N',
  voltage: 'V',
  current: 'A',
  power: 'W',
  rpm: 'rpm',
  temp: '°C',
  torque: 'N·m',
  out: 'fraction',
};

/**
 * Columnar batch of samples: `t` is host time in milliseconds since the Unix epoch, `dt` the device clock in
 * seconds (unwrapped, so it grows monotonically across the device's 32-bit microsecond wrap). A channel not
 * sampled in a frame holds null at that index.
 */
export type SampleBatch = { t: number[]; dt: number[] } & { [C in SampleChannel]: (number | null)[] };

export interface DeviceIdentity {
  protocol: number;
  firmware: string;
  firmwareVersion: string;
  /** Channel name to samples per second. */
  channels: Record<string, number>;
  throttleCeiling: number;
  heartbeatTimeoutMs: number;
  escRateHz?: number;
}

export interface BenchView {
  state: BenchState;
  /** Why the bench entered this state, for people. */
  reason: string;
  /** Host time (ms) of the last transition. */
  since: number;
  armed: boolean;
  /** Throttle the host last commanded (0..1). */
  throttleCommand: number;
  /** Throttle the device reports it is outputting, when known. */
  throttleOutput: number | null;
  fault: FaultCode;
  /** Hard ceiling announced by the device, or 0 before the handshake. */
  ceiling: number;
}

export interface LinkView {
  status: LinkStatus;
  /** What is connected: "virtual bench (in process)" or a port path. */
  source: string;
  linesOk: number;
  /** Bad lines by decoder reason (checksum, too_long, ...). */
  linesBad: Record<string, number>;
  /** Frames missing according to the device's sequence numbers. */
  seqGaps: number;
  /** Lines refused by the writer because its queue was full. */
  writeDropped: number;
  reconnects: number;
  retryInMs: number | null;
  error: { kind: LinkErrorKind; message: string } | null;
}

export type EventLevel = 'info' | 'warn' | 'error';
export interface BenchEvent {
  t: number;
  level: EventLevel;
  /** Machine-readable kind: state, link, device_log, command, trip, warning, ... */
  kind: string;
  text: string;
}

export type Role = 'controller' | 'viewer';

/** Everything a freshly connected (or reconnected) dashboard needs to draw itself. */
export interface Snapshot {
  type: 'snapshot';
  api: number;
  role: Role;
  bench: BenchView;
  link: LinkView;
  identity: DeviceIdentity | null;
  /** Recent history (at most the last few minutes), oldest first. */
  history: SampleBatch;
  events: BenchEvent[];
  /** Extension point for later features (model prediction, rig, atmosphere ...). */
  extras: Record<string, unknown>;
  /** The sequence run in progress or the last one finished (with its points), or null; absent from older daemons. */
  run?: SequenceRunView | null;
}

// ---------------------------------------------------------------- pre-arm checklist

/**
 * What the operator confirms before the first arm of a daemon session, declared once: the dashboard renders
 * these, the daemon accepts a `checklist` message only when it lists every id. The daemon refuses `arm` and
 * `sequence_start` from a dashboard until then. It is a prompt for people, not a safety device: the
 * hard-wired power cut, the firmware and the interlocks are.
 */
export const CHECKLIST_ITEMS = [
  { id: 'stand_secured', text: 'Stand clamped or bolted down; propeller fitted and its nut tight; nothing loose near the disk, intake or wash' },
  { id: 'rotor_plane_clear', text: 'Nobody in the plane of rotation (operator, colleagues, camera)' },
  { id: 'eye_protection', text: 'Eye protection on, for everyone in the room' },
  { id: 'battery_supervised', text: 'Battery in a fire-safe place, supervised, above its minimum cell voltage; the hard-wired power cut is within reach' },
  { id: 'limits_reviewed', text: 'Limits in force reviewed (shown below) and right for this propeller, motor and pack' },
] as const;
export type ChecklistItemId = (typeof CHECKLIST_ITEMS)[number]['id'];
export const CHECKLIST_IDS: readonly ChecklistItemId[] = CHECKLIST_ITEMS.map((i) => i.id);

/** snapshot.extras.checklist: whether this daemon session's checklist has been confirmed, and when. */
export interface ChecklistView {
  confirmed: boolean;
  /** Host time of the confirmation (ms since epoch), or null. */
  at: number | null;
  items: readonly ChecklistItemId[];
}

// ---------------------------------------------------------------- what is mounted (server/parts/)

/** One slot of the mount in force (snapshot.extras.mount.slots). */
export interface MountSlotView {
  slot: PartKind;
  /** The library part and revision, or null for a rig from a file without a library (or an empty duct slot). */
  part_id: number | null;
  revision: number | null;
  /** The part's newest revision: above `revision` when it was revised after mounting. */
  latest: number | null;
  name: string | null;
  /** What is in the slot, in one line. */
  summary: string;
}

/** snapshot.extras.mount: what is on the stand, for every dashboard; only the controller may change it. */
export interface MountView {
  rig: string | null;
  ducted: boolean;
  source: 'library' | 'rig file' | 'virtual bench' | 'none';
  slots: MountSlotView[];
  sigma: number | null;
  tip_clearance_mm: number | null;
  tip_clearance_pct_radius: number | null;
  /** Host time of the mount (ms since epoch). */
  mounted_at: number;
  /** Whether a mount would be accepted now, and if not why (armed, a run in progress, no library). */
  can_mount: boolean;
  why_not: string | null;
}

/** snapshot.extras.parts: the library's parts that can be mounted (latest revisions, none retired). */
export interface PartView {
  id: number;
  kind: PartKind;
  name: string;
  revision: number;
  summary: string;
  notes: string;
}

// ---------------------------------------------------------------- sequences from the dashboard

/** What to run: a shipped example by name, a staircase, or a sequence document pasted as JSON text. */
export type SequenceSource =
  | { kind: 'example'; name: string }
  | { kind: 'staircase'; start: number; stop: number; step: number; hold_s: number; ramp_s?: number; window_s?: number }
  | { kind: 'json'; text: string };

/** snapshot.extras.sequences: the shipped example sequences the daemon can run by name. */
export interface ExampleSequence {
  /** File name without .json: what `{kind:'example', name}` takes. */
  name: string;
  title: string;
  description: string | null;
  steps: number;
  /** Throttles of the steps, in order. */
  throttles: number[];
}

/** Where a run is, as the dashboard shows it (mirrors the runner's RunProgress). */
export interface RunProgressView {
  state: string;
  step: number;
  steps: number;
  target: number | null;
  throttle: number;
  points: number;
  elapsed_s: number;
  remaining_s: number | null;
}

/** One measured step, as the runner reports it (an OperatingPoint plus how it was taken). */
export interface RunPointView extends OperatingPoint {
  settle_s: number;
  direction: 'up' | 'down' | null;
  label: string | null;
  pass: number[];
}

export interface SequenceRunView {
  /** Counter of runs in this daemon session, from 1. */
  run: number;
  name: string;
  /** Session recording the run, when the daemon keeps sessions. */
  session: number | null;
  state: string;
  reason: string;
  /** True while the runner may still move the motor (not finished). */
  live: boolean;
  progress: RunProgressView;
  /** Final outcome once finished (completed, aborted, tripped, interrupted). */
  outcome: string | null;
  started_at: number;
  ended_at: number | null;
  /** Present in the snapshot; 'run' messages leave it out (points come one by one as 'run_point'). */
  points?: RunPointView[];
}

/** A field-level problem with a sequence, as the daemon reports it on refusal. */
export interface SequenceIssueView {
  path: string;
  rule: string;
}

// ---------------------------------------------------------------- zero before every run

/** One at-rest reading of the thrust (server/bench/zero.ts judgeRest). */
export interface ZeroReadingView {
  /** Mean thrust at rest, N, in the zero in force while it was read. */
  mean_N: number;
  std_N: number;
  slope_N_per_s: number;
  n: number;
  window_s: number;
  rpm_max: number | null;
  steady: boolean;
  why: string;
}

/**
 * The zero step of a run: 'checking' while the thrust at rest is read, then 'tared' (the reading became the
 * zero), 'kept' (the operator asked to keep the earlier zero) or 'refused' (not at rest or not steady: nothing
 * armed). 'none' before the first run of a daemon session.
 */
export type ZeroStepState = 'none' | 'checking' | 'tared' | 'kept' | 'refused';

/** The zero's drift over the last run: the thrust at rest read again once it ended. */
export interface ZeroDriftView {
  state: 'checking' | 'read' | 'not_read';
  reason: string;
  /** Session of the run, when recorded. */
  session: number | null;
  drift_N: number | null;
  /** Thrust range of the run (largest minus smallest reading while armed), N. */
  range_N: number | null;
  fraction: number | null;
  limit_N: number | null;
  warned: boolean;
  at: number;
}

/** snapshot.extras.zero, and an extras message whenever it changes. */
export interface ZeroView {
  state: ZeroStepState;
  reason: string;
  /** Offset taken off every calibrated thrust reading, N (0 until the first zero). */
  offset_N: number;
  /** Host time the offset was taken, or null. */
  at: number | null;
  /** The last at-rest reading before a run. */
  reading: ZeroReadingView | null;
  /** The last post-run check. */
  after: ZeroDriftView | null;
  /** A post-run drift larger than this fraction of the run's thrust range warns. */
  drift_fraction: number;
}

// ---------------------------------------------------------------- calibration from the dashboard

/** What a dashboard can calibrate (CalibrationWorkflows in server/calibration/workflows.ts does the work). */
export type CalibrationAction = 'tare' | 'span' | 'current_zero' | 'current_reference' | 'voltage_reference' | 'rpm_pulses';

/**
 * A calibration job's lifecycle (one transition function, server/bench/calibration-service.ts). 'placing'
 * happens only in a span: the daemon waits for the operator to hang (or take off) the load it names and
 * confirm with calibration_span_placed. 'applied' is the only end in which anything became the calibration
 * in force; 'refused' (implausible, with the reason), 'cancelled' and 'failed' applied nothing.
 */
export type CalibrationJobState = 'placing' | 'measuring' | 'applied' | 'refused' | 'cancelled' | 'failed';

/** One averaged raw reading a job took. */
export interface CalibrationReadingView {
  /** Span: the load on the cell, kg (0 = empty); null for the other actions. */
  load_kg: number | null;
  /** Mean raw reading over the window, in the channel's unit, before the host calibration. */
  raw: number;
  std: number;
  n: number;
  /** What it should read: load x g0 (N) for a span, the operator's meter for a reference, 0 for a zero. */
  reference: number;
}

/** A straight-line fit of reference against raw (span), shown whether it was applied or refused. */
export interface CalibrationFitView {
  scale: number;
  offset: number;
  /** Per reading, reference minus fit, in the channel's unit (N for a span). */
  residuals: number[];
  /** Largest |residual| over the span of the references, percent; null with two readings (nothing to judge). */
  non_linearity_pct: number | null;
  rms: number;
  r2: number;
}

/** One entry of the calibration history (server/calibration/history.ts CalibrationEntry, as JSON). */
export interface CalibrationEntryView {
  /** ISO date-time. */
  at: string;
  channel: 'thrust' | 'voltage' | 'current' | 'torque' | 'rpm';
  kind: 'tare' | 'span' | 'zero' | 'scale' | 'pulses_per_rev';
  /** value = scale x raw + offset, in force from this entry on. */
  result: { scale: number; offset: number };
  points?: { raw: number; reference: number }[];
  residuals?: number[];
  nonLinearityPct?: number;
  temperatureC?: number | null;
  note?: string;
}

export interface CalibrationJobView {
  /** Counter of jobs in this daemon session, from 1. */
  job: number;
  action: CalibrationAction;
  state: CalibrationJobState;
  /** For people: the instruction while live (what to hang, what is being measured), then what happened. */
  reason: string;
  /** Span: every load in order, the empty cell first (kg); [] for the other actions. */
  loads_kg: number[];
  /** Span: index into loads_kg of the load asked for or being measured. */
  step: number;
  readings: CalibrationReadingView[];
  fit: CalibrationFitView | null;
  /** The history entry made, when applied. */
  entry: CalibrationEntryView | null;
  live: boolean;
  started_at: number;
  ended_at: number | null;
}

/** snapshot.extras.calibration, and an extras message whenever it changes. */
export interface CalibrationStatusView {
  /** Null when the dashboard can calibrate this daemon; otherwise why it cannot (no data folder, unreadable history). */
  unavailable: string | null;
  /** The live job, or the last one finished, or null. */
  job: CalibrationJobView | null;
  /** The calibration in force, per channel. */
  in_force: Record<CalibrationEntryView['channel'], { scale: number; offset: number }>;
  /** Missing, old, or made at another temperature (calibrationWarnings); re-checked as temperature readings arrive. */
  warnings: string[];
  /** Latest temperature reading the warnings were checked with, degC, or null. */
  temperature_C: number | null;
}

/** snapshot.extras.calibration_history, and an extras message after every new entry. */
export interface CalibrationHistoryView {
  /** Entries in the history file. */
  total: number;
  /** The latest CALIBRATION_HISTORY_SHOWN of them, oldest first. */
  entries: CalibrationEntryView[];
}

export const CALIBRATION_HISTORY_SHOWN = 100;
/** Span masses per job, at most, and the largest mass (kg), as the workflow accepts them. */
export const MAX_SPAN_MASSES = 8;
export const MAX_SPAN_MASS_KG = 100;
/** Largest reference reading accepted per channel (V, A): above that it is a typo, not a bench meter. */
export const MAX_REFERENCE: Record<'current' | 'voltage', number> = { voltage: 100, current: 200 };

export type ServerMessage =
  | Snapshot
  | { type: 'samples'; batch: SampleBatch }
  | { type: 'bench'; bench: BenchView }
  | { type: 'link'; link: LinkView }
  | { type: 'identity'; identity: DeviceIdentity | null }
  | { type: 'event'; event: BenchEvent }
  | { type: 'extras'; extras: Record<string, unknown> }
  | { type: 'run'; run: SequenceRunView }
  | { type: 'run_point'; run: number; point: RunPointView }
  /** This dashboard's role changed (a takeover). */
  | { type: 'role'; role: Role }
  /** To the controlling dashboard: another dashboard asks for control; answer with takeover_answer. */
  | { type: 'takeover_asked'; request: number; from: number }
  | { type: 'reply'; id: number; ok: true; data?: unknown }
  /** `issues`: field-level problems, when a sequence was refused. */
  | { type: 'reply'; id: number; ok: false; error: string; issues?: SequenceIssueView[] };

export type ClientMessage =
  | { type: 'stop'; id?: number }
  /** `keep_zero`: skip the zero step and keep the earlier zero (the session says so). */
  | { type: 'arm'; id?: number; keep_zero?: boolean }
  | { type: 'disarm'; id?: number }
  | { type: 'throttle'; id?: number; value: number }
  | { type: 'clear'; id?: number }
  | { type: 'tare'; id?: number }
  | { type: 'ping'; id?: number }
  /** Every id of CHECKLIST_ITEMS, ticked by the operator. */
  | { type: 'checklist'; id?: number; items: ChecklistItemId[] }
  /** `check_only`: validate against the device and rig and reply with the plan, arming nothing. */
  | { type: 'sequence_start'; id?: number; source: SequenceSource; title?: string; tags?: string[]; check_only?: boolean; keep_zero?: boolean }
  | { type: 'sequence_pause'; id?: number }
  | { type: 'sequence_resume'; id?: number }
  | { type: 'sequence_abort'; id?: number }
  /** Calibration jobs: each replies at once with the job's view; the job then moves on in extras.calibration. */
  | { type: 'calibration_tare'; id?: number }
  /** Known masses, kg (the empty cell is measured first whether listed or not). */
  | { type: 'calibration_span_start'; id?: number; masses_kg: number[] }
  /** The operator has placed the load of `step` (CalibrationJobView.step): measure it. */
  | { type: 'calibration_span_placed'; id?: number; step: number }
  | { type: 'calibration_cancel'; id?: number }
  | { type: 'calibration_current_zero'; id?: number }
  /** The reference meter's reading now (A or V), typed by the operator. */
  | { type: 'calibration_reference'; id?: number; channel: 'current' | 'voltage'; reading: number }
  /** rpm pickup: pulses it really gives per revolution, and what the firmware is set for. */
  | { type: 'calibration_rpm_pulses'; id?: number; actual: number; firmware: number }
  /** A viewer asks for control: granted at once when no dashboard has it, else the controller is asked. */
  /** Mount library parts (their latest revisions) while disarmed; duct null for an open propeller. */
  | { type: 'mount'; id?: number; parts: MountRequest; name?: string }
  /** Add a part to the library; `document` holds the kind's fields (as in a rig file), notes and limits. */
  | { type: 'part_create'; id?: number; kind: PartKind; name: string; document: Record<string, unknown> }
  | { type: 'takeover_request'; id?: number }
  /** The controller's answer to takeover_asked. */
  | { type: 'takeover_answer'; id?: number; request: number; allow: boolean };

export type ClientMessageType = ClientMessage['type'];

/**
 * Largest client message accepted, in bytes (the WebSocket server's maxPayload). Room for a pasted sequence
 * document; the rate limit keeps the parsing cost per client small.
 */
export const MAX_CLIENT_MESSAGE_BYTES = 64 * 1024;
/** Longest pasted sequence text. */
export const MAX_SEQUENCE_TEXT = 60 * 1024;

/** Commands that need the controller role; viewers may only ping (and stop: anyone may stop the motor). */
export const CONTROL_TYPES: ReadonlySet<ClientMessageType> = new Set([
  'arm',
  'disarm',
  'throttle',
  'clear',
  'tare',
  'checklist',
  'sequence_start',
  'sequence_pause',
  'sequence_resume',
  'sequence_abort',
  'calibration_tare',
  'calibration_span_start',
  'calibration_span_placed',
  'calibration_cancel',
  'calibration_current_zero',
  'calibration_reference',
  'calibration_rpm_pulses',
  'mount',
  'part_create',
]);

const CLIENT_FIELDS: Record<ClientMessageType, readonly string[]> = {
  stop: [],
  arm: ['keep_zero'],
  disarm: [],
  throttle: ['value'],
  clear: [],
  tare: [],
  ping: [],
  checklist: ['items'],
  sequence_start: ['source', 'title', 'tags', 'check_only', 'keep_zero'],
  sequence_pause: [],
  sequence_resume: [],
  sequence_abort: [],
  calibration_tare: [],
  calibration_span_start: ['masses_kg'],
  calibration_span_placed: ['step'],
  calibration_cancel: [],
  calibration_current_zero: [],
  calibration_reference: ['channel', 'reading'],
  calibration_rpm_pulses: ['actual', 'firmware'],
  mount: ['parts', 'name'],
  part_create: ['kind', 'name', 'document'],
  takeover_request: [],
  takeover_answer: ['request', 'allow'],
};

const SOURCE_FIELDS: Record<SequenceSource['kind'], { required: readonly string[]; optional: readonly string[] }> = {
  example: { required: ['name'], optional: [] },
  staircase: { required: ['start', 'stop', 'step', 'hold_s'], optional: ['ramp_s', 'window_s'] },
  json: { required: ['text'], optional: [] },
};

function isObject(v: unknown): v is Record<string, unknown> {
  return typeof v === 'object' && v !== null && !Array.isArray(v);
}

function checkSource(raw: unknown): string | null {
  if (!isObject(raw)) return 'sequence_start.source must be an object';
  const kind = raw.kind;
  if (typeof kind !== 'string' || !Object.prototype.hasOwnProperty.call(SOURCE_FIELDS, kind)) {
    return `sequence_start.source.kind must be one of ${Object.keys(SOURCE_FIELDS).join(', ')}`;
  }
  const f = SOURCE_FIELDS[kind as SequenceSource['kind']];
  const allowed = new Set(['kind', ...f.required, ...f.optional]);
  for (const k of Object.keys(raw)) if (!allowed.has(k)) return `sequence_start.source: unknown key ${JSON.stringify(k)} for kind ${kind}`;
  for (const k of f.required) if (raw[k] === undefined) return `sequence_start.source.${k} is required for kind ${kind}`;
  if (kind === 'example') {
    const n = raw.name;
    // A name, never a path: the daemon looks it up in its own list.
    if (typeof n !== 'string' || !/^[A-Za-z0-9_-]{1,80}$/.test(n)) return 'sequence_start.source.name must be an example name (letters, digits, - and _)';
  } else if (kind === 'json') {
    if (typeof raw.text !== 'string') return 'sequence_start.source.text must be a string';
    if (raw.text.length > MAX_SEQUENCE_TEXT) return `sequence_start.source.text is longer than ${MAX_SEQUENCE_TEXT} characters`;
  } else {
    // Ranges are the sequence schema's business (it names the field); here only the type.
    for (const k of [...f.required, ...f.optional]) {
      const v = raw[k];
      if (v !== undefined && (typeof v !== 'number' || !Number.isFinite(v))) return `sequence_start.source.${k} must be a finite number`;
    }
  }
  return null;
}

export type ParseResult<T> = { ok: true; value: T } | { ok: false; error: string };

/**
 * Validates a client message. Unknown types and keys, non-finite numbers and out-of-range values are refused
 * with an error, never clamped: a typo must not move a motor.
 */
export function parseClientMessage(text: string): ParseResult<ClientMessage> {
  let raw: unknown;
  try {
    raw = JSON.parse(text);
  } catch {
    return { ok: false, error: 'message is not JSON' };
  }
  if (typeof raw !== 'object' || raw === null || Array.isArray(raw)) return { ok: false, error: 'message must be a JSON object' };
  const obj = raw as Record<string, unknown>;
  const type = obj.type;
  if (typeof type !== 'string' || !Object.prototype.hasOwnProperty.call(CLIENT_FIELDS, type)) {
    return { ok: false, error: `unknown message type ${JSON.stringify(type)}` };
  }
  const allowed = new Set(['type', 'id', ...CLIENT_FIELDS[type as ClientMessageType]]);
  for (const k of Object.keys(obj)) if (!allowed.has(k)) return { ok: false, error: `${type}: unknown key ${JSON.stringify(k)}` };
  if (obj.id !== undefined && !(Number.isSafeInteger(obj.id) && (obj.id as number) >= 0)) return { ok: false, error: `${type}.id must be a non-negative integer` };
  if (type === 'throttle') {
    const v = obj.value;
    if (typeof v !== 'number' || !Number.isFinite(v)) return { ok: false, error: 'throttle.value must be a finite number' };
    if (v < 0 || v > 1) return { ok: false, error: `throttle.value ${v} outside 0..1` };
  }
  if (type === 'takeover_answer') {
    if (!(Number.isSafeInteger(obj.request) && (obj.request as number) >= 0)) return { ok: false, error: 'takeover_answer.request must be a non-negative integer' };
    if (typeof obj.allow !== 'boolean') return { ok: false, error: 'takeover_answer.allow must be true or false' };
  }
  if (type === 'checklist') {
    const items = obj.items;
    if (!Array.isArray(items) || items.length > CHECKLIST_IDS.length) return { ok: false, error: `checklist.items must be a list of at most ${CHECKLIST_IDS.length} item ids` };
    const seen = new Set<string>();
    for (const it of items) {
      if (typeof it !== 'string' || !(CHECKLIST_IDS as readonly string[]).includes(it)) return { ok: false, error: `checklist.items: unknown item ${JSON.stringify(it)}` };
      if (seen.has(it)) return { ok: false, error: `checklist.items: ${it} given twice` };
      seen.add(it);
    }
  }
  if (type === 'sequence_start') {
    const bad = checkSource(obj.source);
    if (bad) return { ok: false, error: bad };
    if (obj.title !== undefined && (typeof obj.title !== 'string' || obj.title.length > 200)) return { ok: false, error: 'sequence_start.title must be a string of at most 200 characters' };
    if (obj.tags !== undefined) {
      const tags = obj.tags;
      if (!Array.isArray(tags) || tags.length > 20 || tags.some((t) => typeof t !== 'string' || t.length === 0 || t.length > 64)) {
        return { ok: false, error: 'sequence_start.tags must be a list of at most 20 non-empty strings of at most 64 characters' };
      }
    }
    if (obj.check_only !== undefined && typeof obj.check_only !== 'boolean') return { ok: false, error: 'sequence_start.check_only must be true or false' };
  }
  if ((type === 'arm' || type === 'sequence_start') && obj.keep_zero !== undefined && typeof obj.keep_zero !== 'boolean') return { ok: false, error: `${type}.keep_zero must be true or false` };
  if (type === 'mount' || type === 'part_create') {
    const bad = checkParts(type, obj);
    if (bad) return { ok: false, error: bad };
  }
  if (type.startsWith('calibration_')) {
    const bad = checkCalibration(type, obj);
    if (bad) return { ok: false, error: bad };
  }
  return { ok: true, value: obj as unknown as ClientMessage };
}

/** Shape checks of the parts messages; a part's fields are the library's to judge (it names the field). */
function checkParts(type: string, obj: Record<string, unknown>): string | null {
  const name = obj.name;
  if (name !== undefined && (typeof name !== 'string' || name.trim() === '' || name.length > MAX_PART_NAME)) return `${type}.name must be a non-empty string of at most ${MAX_PART_NAME} characters`;
  if (type === 'part_create') {
    if (!(PART_KINDS as readonly unknown[]).includes(obj.kind)) return `part_create.kind must be one of ${PART_KINDS.join(', ')}`;
    if (name === undefined) return 'part_create.name is required';
    if (!isObject(obj.document)) return 'part_create.document must be an object';
    return null;
  }
  const parts = obj.parts;
  if (!isObject(parts)) return 'mount.parts must be an object with a part id for each of propeller, motor, esc, supply, duct';
  for (const k of Object.keys(parts)) if (!(PART_KINDS as readonly string[]).includes(k)) return `mount.parts: unknown slot ${JSON.stringify(k)}`;
  for (const k of PART_KINDS) {
    const v = parts[k];
    if (k === 'duct' && v === null) continue;
    if (!(Number.isSafeInteger(v) && (v as number) >= 1)) return `mount.parts.${k} must be a part id${k === 'duct' ? ' or null (open propeller)' : ''}`;
  }
  return null;
}

/** Field checks of the calibration messages (every field is required). */
function checkCalibration(type: string, obj: Record<string, unknown>): string | null {
  const finite = (v: unknown): v is number => typeof v === 'number' && Number.isFinite(v);
  const whole = (v: unknown, lo: number, hi: number): boolean => Number.isSafeInteger(v) && (v as number) >= lo && (v as number) <= hi;
  switch (type) {
    case 'calibration_span_start': {
      const m = obj.masses_kg;
      if (!Array.isArray(m) || m.length < 1 || m.length > MAX_SPAN_MASSES) return `calibration_span_start.masses_kg must be a list of 1 to ${MAX_SPAN_MASSES} masses in kg`;
      for (const x of m) {
        if (!finite(x)) return 'calibration_span_start.masses_kg: every mass must be a finite number (kg)';
        if (x < 0 || x > MAX_SPAN_MASS_KG) return `calibration_span_start.masses_kg: ${x} kg outside 0..${MAX_SPAN_MASS_KG}`;
      }
      if (new Set(m).size !== m.length) return 'calibration_span_start.masses_kg: a mass is listed twice';
      if (!m.some((x) => (x as number) > 0)) return 'calibration_span_start.masses_kg: needs at least one mass above 0 kg';
      return null;
    }
    case 'calibration_span_placed':
      return whole(obj.step, 0, MAX_SPAN_MASSES) ? null : `calibration_span_placed.step must be a whole number 0..${MAX_SPAN_MASSES}`;
    case 'calibration_reference': {
      const ch = obj.channel;
      if (ch !== 'current' && ch !== 'voltage') return 'calibration_reference.channel must be current or voltage';
      const v = obj.reading;
      if (!finite(v)) return 'calibration_reference.reading must be a finite number';
      if (v <= 0 || v > MAX_REFERENCE[ch]) return `calibration_reference.reading ${v} outside 0..${MAX_REFERENCE[ch]} ${ch === 'current' ? 'A' : 'V'} (above zero)`;
      return null;
    }
    case 'calibration_rpm_pulses':
      for (const k of ['actual', 'firmware'] as const) if (!whole(obj[k], 1, 64)) return `calibration_rpm_pulses.${k} must be a whole number 1..64`;
      return null;
    default:
      return null;
  }
}

export function emptyBatch(): SampleBatch {
  return { t: [], dt: [], thrust: [], voltage: [], current: [], power: [], rpm: [], temp: [], torque: [], out: [] };
}
