// The one declaration of the WebSocket API between the daemon and the dashboard (path /ws, JSON text frames).
// Both sides import these types; the validator below is the only way a client message enters the daemon.
// Pure module: no I/O, safe to import in the browser.

import type { FaultCode } from '../../firmware-protocol/src/messages.js';

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
}

export type ServerMessage =
  | Snapshot
  | { type: 'samples'; batch: SampleBatch }
  | { type: 'bench'; bench: BenchView }
  | { type: 'link'; link: LinkView }
  | { type: 'identity'; identity: DeviceIdentity | null }
  | { type: 'event'; event: BenchEvent }
  | { type: 'extras'; extras: Record<string, unknown> }
  | { type: 'reply'; id: number; ok: true }
  | { type: 'reply'; id: number; ok: false; error: string };

export type ClientMessage =
  | { type: 'stop'; id?: number }
  | { type: 'arm'; id?: number }
  | { type: 'disarm'; id?: number }
  | { type: 'throttle'; id?: number; value: number }
  | { type: 'clear'; id?: number }
  | { type: 'tare'; id?: number }
  | { type: 'ping'; id?: number };

export type ClientMessageType = ClientMessage['type'];

/** Largest client message accepted, in bytes (the WebSocket server's maxPayload). */
export const MAX_CLIENT_MESSAGE_BYTES = 4096;

/** Commands that need the controller role; viewers may only ping (and stop: anyone may stop the motor). */
export const CONTROL_TYPES: ReadonlySet<ClientMessageType> = new Set(['arm', 'disarm', 'throttle', 'clear', 'tare']);

const CLIENT_FIELDS: Record<ClientMessageType, readonly string[]> = {
  stop: [],
  arm: [],
  disarm: [],
  throttle: ['value'],
  clear: [],
  tare: [],
  ping: [],
};

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
  return { ok: true, value: obj as unknown as ClientMessage };
}

export function emptyBatch(): SampleBatch {
  return { t: [], dt: [], thrust: [], voltage: [], current: [], power: [], rpm: [], temp: [], torque: [], out: [] };
}
