// The one declaration of wire protocol v1. The encoder, the decoder, the tables in PROTOCOL.md and the
// conformance vectors' checks are all derived from this file; a message or field added here is added
// everywhere. Keep it free of I/O so the browser, the virtual bench and the tests can import it.

export const PROTOCOL_VERSION = 1;

/** Longest line, in bytes, not counting the terminating newline (a trailing CR is tolerated and not counted). */
export const MAX_LINE_BYTES = 240;

/** Sequence numbers count 0..SEQ_MODULO-1 per direction and wrap. */
export const SEQ_MODULO = 65536;

/** Default heartbeat loss time-out the firmware applies, in milliseconds (the device may announce a shorter one). */
export const DEFAULT_HEARTBEAT_TIMEOUT_MS = 300;

/** How often the host sends a heartbeat, in milliseconds: three chances inside the default time-out. */
export const HEARTBEAT_INTERVAL_MS = 100;

export type Direction = 'd2h' | 'h2d';

/** Field kinds. 'text' is free text to the end of the line (spaces allowed, no '*'); only the last field may be text. */
export type FieldKind = 'uint' | 'int' | 'num' | 'bool' | 'token' | 'enum' | 'list' | 'text';

export interface FieldSpec {
  readonly key: string;
  readonly kind: FieldKind;
  /** SI unit (or fraction/count), shown in PROTOCOL.md; null for dimensionless identifiers. */
  readonly unit: string | null;
  readonly required: boolean;
  /** Decimal places used when encoding 'num' fields. */
  readonly decimals?: number;
  /** Inclusive range accepted by the decoder for numeric kinds. */
  readonly min?: number;
  readonly max?: number;
  /** Allowed values for 'enum'. */
  readonly values?: readonly string[];
  readonly doc: string;
}

export interface MessageSpec {
  readonly dir: Direction;
  readonly doc: string;
  /** True when the message changes or reports what the motor does. */
  readonly safety: boolean;
  /** Host commands the device answers with ACK or NAK. */
  readonly acked: boolean;
  readonly fields: readonly FieldSpec[];
}

/** Fault codes the firmware latches. 'none' means no fault. */
export const FAULT_CODES = [
  'none',
  'estop', // emergency stop command received
  'heartbeat', // host heartbeat lost
  'host_trip', // the host cut the throttle because one of its limits tripped
  'brownout', // supply voltage fell below the firmware's floor
  'reset', // the controller restarted other than by power-on; latched at boot
  'sensor', // a required sensor stopped answering
  'overcurrent', // the firmware's own hard current limit
] as const;
export type FaultCode = (typeof FAULT_CODES)[number];

/** Reasons the device gives when it refuses a command. */
export const REFUSAL_CODES = [
  'not_ready', // no handshake yet
  'latched', // a fault is latched; only HELLO, HB, STATUS, STOP, CLEAR, DISARM and BYE are accepted
  'not_armed', // throttle asked for while disarmed
  'throttle_not_zero', // arm asked for while the throttle is above zero
  'above_ceiling', // throttle above the hard ceiling: refused, never clamped
  'bad_value', // a field is out of range
  'unsupported', // the command or a capability is not available
  'busy', // a calibration or tare is still running
] as const;
export type RefusalCode = (typeof REFUSAL_CODES)[number];

/** Why the device booted, carried only by the IDENT it sends at boot (IDENT boot=). */
export const BOOT_CAUSES = ['power', 'reset'] as const;
export type BootCause = (typeof BOOT_CAUSES)[number];

export const CHANNELS = ['thrust', 'voltage', 'current', 'rpm', 'temp', 'torque'] as const;
export type Channel = (typeof CHANNELS)[number];

const seqRef = {
  key: 'ref',
  kind: 'uint',
  unit: null,
  required: true,
  min: 0,
  max: SEQ_MODULO - 1,
  doc: 'Sequence number of the host command this answers.',
} as const satisfies FieldSpec;

export const MESSAGES = {
  // ---------------------------------------------------------------- device to host
  IDENT: {
    dir: 'd2h',
    doc: 'Identity, sent in answer to HELLO (echoing its nonce) and once at boot (with boot=). The host refuses a device whose protocol differs.',
    safety: false,
    acked: false,
    fields: [
      { key: 'proto', kind: 'uint', unit: null, required: true, min: 0, max: 999, doc: 'Protocol version; this document describes 1.' },
      { key: 'fw', kind: 'token', unit: null, required: true, doc: 'Firmware name.' },
      { key: 'fwver', kind: 'token', unit: null, required: true, doc: 'Firmware version.' },
      { key: 'caps', kind: 'list', unit: 'Hz', required: true, doc: 'Channels fitted, each as name@rate (samples per second), e.g. thrust@80,voltage@1000.' },
      { key: 'thrmax', kind: 'num', unit: 'fraction', required: true, decimals: 3, min: 0, max: 1, doc: 'Hard throttle ceiling the firmware enforces (0 to 1).' },
      { key: 'hb', kind: 'uint', unit: 'ms', required: true, min: 20, max: 5000, doc: 'Heartbeat loss time-out the firmware applies.' },
      { key: 'escrate', kind: 'uint', unit: 'Hz', required: false, min: 1, max: 2000, doc: 'ESC pulse rate.' },
      { key: 'nonce', kind: 'uint', unit: null, required: false, min: 0, max: 65535, doc: 'The nonce of the HELLO this IDENT answers, copied unchanged; absent when that HELLO carried none, and in the IDENT sent at boot.' },
      { key: 'boot', kind: 'enum', unit: null, required: false, values: BOOT_CAUSES, doc: 'Only in the IDENT sent at boot, never in an answer: power after a power-on, reset after any other restart.' },
    ],
  },
  TEL: {
    dir: 'd2h',
    doc: 'Telemetry. Each frame carries the channels sampled since the last frame; channels not sampled are left out.',
    safety: true,
    acked: false,
    fields: [
      { key: 't', kind: 'uint', unit: 'us', required: true, min: 0, max: 4294967295, doc: 'Device clock in microseconds; wraps at 2^32.' },
      { key: 'thrust', kind: 'num', unit: 'N', required: false, decimals: 4, min: -10000, max: 10000, doc: 'Load-cell thrust after tare, positive pushing the stand forward.' },
      { key: 'v', kind: 'num', unit: 'V', required: false, decimals: 3, min: -1000, max: 1000, doc: 'Bus voltage at the ESC.' },
      { key: 'i', kind: 'num', unit: 'A', required: false, decimals: 3, min: -1000, max: 1000, doc: 'Bus current into the ESC.' },
      { key: 'rpm', kind: 'num', unit: 'rpm', required: false, decimals: 0, min: 0, max: 1000000, doc: 'Shaft speed.' },
      { key: 'temp', kind: 'num', unit: 'degC', required: false, decimals: 1, min: -100, max: 500, doc: 'Motor temperature.' },
      { key: 'torque', kind: 'num', unit: 'N m', required: false, decimals: 5, min: -1000, max: 1000, doc: 'Reaction torque.' },
      { key: 'out', kind: 'num', unit: 'fraction', required: false, decimals: 3, min: 0, max: 1, doc: 'Throttle output the ESC is receiving now.' },
    ],
  },
  STAT: {
    dir: 'd2h',
    doc: 'Status: sent on every change, in answer to STATUS, and at least every 200 ms.',
    safety: true,
    acked: false,
    fields: [
      { key: 'armed', kind: 'bool', unit: null, required: true, doc: '1 when armed.' },
      { key: 'out', kind: 'num', unit: 'fraction', required: true, decimals: 3, min: 0, max: 1, doc: 'Throttle output now.' },
      { key: 'fault', kind: 'enum', unit: null, required: true, values: FAULT_CODES, doc: 'Latched fault, or none.' },
      { key: 'hbok', kind: 'bool', unit: null, required: true, doc: '1 while heartbeats arrive in time.' },
    ],
  },
  ACK: {
    dir: 'd2h',
    doc: 'A host command was carried out.',
    safety: true,
    acked: false,
    fields: [seqRef],
  },
  NAK: {
    dir: 'd2h',
    doc: 'A host command was refused; nothing changed.',
    safety: true,
    acked: false,
    fields: [seqRef, { key: 'why', kind: 'enum', unit: null, required: true, values: REFUSAL_CODES, doc: 'Reason for the refusal.' }],
  },
  LOG: {
    dir: 'd2h',
    doc: 'Free text from the firmware, for people.',
    safety: false,
    acked: false,
    fields: [
      { key: 'level', kind: 'enum', unit: null, required: true, values: ['debug', 'info', 'warn', 'error'], doc: 'Severity.' },
      { key: 'msg', kind: 'text', unit: null, required: true, doc: 'The text (printable ASCII, no asterisk), to the end of the line.' },
    ],
  },
  // ---------------------------------------------------------------- host to device
  HELLO: {
    dir: 'h2d',
    doc: 'Handshake. The device answers IDENT and a STAT, and accepts other commands only after it.',
    safety: false,
    acked: false,
    fields: [
      { key: 'proto', kind: 'uint', unit: null, required: true, min: 0, max: 999, doc: 'Protocol version the host speaks.' },
      { key: 'host', kind: 'token', unit: null, required: false, doc: 'Host software name.' },
      { key: 'nonce', kind: 'uint', unit: null, required: false, min: 0, max: 65535, doc: 'Chosen afresh by the host for every HELLO; the IDENT that answers copies it. Optional so that a HELLO can be typed by hand.' },
    ],
  },
  HB: {
    dir: 'h2d',
    doc: 'Heartbeat. When none arrives within the time-out the firmware sets the stop output, disarms and latches heartbeat.',
    safety: true,
    acked: false,
    fields: [],
  },
  STATUS: {
    dir: 'h2d',
    doc: 'Asks for a STAT now. Accepted while a fault is latched.',
    safety: false,
    acked: false,
    fields: [],
  },
  ARM: {
    dir: 'h2d',
    doc: 'Arm the ESC output. Refused unless handshaken, unlatched and the commanded throttle is zero.',
    safety: true,
    acked: true,
    fields: [],
  },
  DISARM: {
    dir: 'h2d',
    doc: 'Set the stop output and disarm. Carried out in every state, before the handshake and while latched too.',
    safety: true,
    acked: true,
    fields: [],
  },
  THR: {
    dir: 'h2d',
    doc: 'Set the throttle. Refused (never clamped) above the ceiling, and while disarmed unless zero.',
    safety: true,
    acked: true,
    fields: [{ key: 'v', kind: 'num', unit: 'fraction', required: true, decimals: 4, min: 0, max: 1, doc: 'Throttle, 0 (stop) to 1 (full).' }],
  },
  STOP: {
    dir: 'h2d',
    doc: 'Emergency stop: handled ahead of anything queued, in every state (before the handshake too); stop output, disarm, latch estop (or the given fault) unless a fault is latched already.',
    safety: true,
    acked: true,
    fields: [
      { key: 'why', kind: 'enum', unit: null, required: false, values: ['estop', 'host_trip'], doc: 'Fault to latch; estop when left out.' },
    ],
  },
  BYE: {
    dir: 'h2d',
    doc: 'The host ends its session cleanly: stop output, disarm, forget the handshake and stop watching the heartbeat. Latches nothing and clears nothing.',
    safety: true,
    acked: true,
    fields: [],
  },
  CLEAR: {
    dir: 'h2d',
    doc: 'Clear a latched fault. The device stays disarmed.',
    safety: true,
    acked: true,
    fields: [],
  },
  TARE: {
    dir: 'h2d',
    doc: 'Zero the load cell over the next samples. Refused while armed.',
    safety: false,
    acked: true,
    fields: [{ key: 'n', kind: 'uint', unit: 'samples', required: false, min: 1, max: 1000, doc: 'Samples to average (default 16).' }],
  },
  CALSET: {
    dir: 'h2d',
    doc: 'Reserved for calibration: set one channel scale and offset held by the firmware.',
    safety: false,
    acked: true,
    fields: [
      { key: 'ch', kind: 'enum', unit: null, required: true, values: CHANNELS, doc: 'Channel.' },
      { key: 'scale', kind: 'num', unit: null, required: true, decimals: 6, min: -1e9, max: 1e9, doc: 'Scale factor.' },
      { key: 'offset', kind: 'num', unit: null, required: true, decimals: 6, min: -1e9, max: 1e9, doc: 'Offset, in channel units.' },
    ],
  },
} as const satisfies Record<string, MessageSpec>;

export type MessageTag = keyof typeof MESSAGES;
export type HostCommandTag = { [K in MessageTag]: (typeof MESSAGES)[K]['dir'] extends 'h2d' ? K : never }[MessageTag];
export type DeviceMessageTag = { [K in MessageTag]: (typeof MESSAGES)[K]['dir'] extends 'd2h' ? K : never }[MessageTag];

type KindType<F> = F extends { kind: 'uint' | 'int' | 'num' }
  ? number
  : F extends { kind: 'bool' }
    ? boolean
    : F extends { kind: 'list' }
      ? string[]
      : F extends { kind: 'enum'; values: readonly (infer V)[] }
        ? V
        : string;

type FieldList<M extends MessageTag> = (typeof MESSAGES)[M]['fields'][number];
type RequiredKeys<M extends MessageTag> = Extract<FieldList<M>, { required: true }>['key'];
type OptionalKeys<M extends MessageTag> = Extract<FieldList<M>, { required: false }>['key'];

/** The decoded fields of message M, typed from the declaration above. */
export type FieldsOf<M extends MessageTag> = {
  [K in RequiredKeys<M>]: KindType<Extract<FieldList<M>, { key: K }>>;
} & {
  [K in OptionalKeys<M>]?: KindType<Extract<FieldList<M>, { key: K }>>;
};

/** A decoded line: tag, sequence number and typed fields. */
export type Frame = { [M in MessageTag]: { tag: M; seq: number; fields: FieldsOf<M> } }[MessageTag];
export type FrameOf<M extends MessageTag> = Extract<Frame, { tag: M }>;
export type DeviceFrame = Extract<Frame, { tag: DeviceMessageTag }>;
export type HostFrame = Extract<Frame, { tag: HostCommandTag }>;

export function messageSpec(tag: string): MessageSpec | undefined {
  return Object.prototype.hasOwnProperty.call(MESSAGES, tag) ? (MESSAGES as Record<string, MessageSpec>)[tag] : undefined;
}
