// Shapes of what the session store keeps: the context a session starts with, its events, and what queries
// return. Pure types; the database layout lives in schema.ts.

import type { BenchEvent, DeviceIdentity } from '../api/messages.js';
import type { Calibration } from '../bench/calibration.js';
import type { OperatingPoint } from '../bench/operating-point.js';
import type { Sample } from '../bench/telemetry.js';
import type { RigSpec } from '../model/rig-types.js';
import type { MountedPart } from '../parts/types.js';

export type SessionOutcome = 'running' | 'completed' | 'tripped' | 'aborted' | 'interrupted';
export const SESSION_OUTCOMES: readonly SessionOutcome[] = ['running', 'completed', 'tripped', 'aborted', 'interrupted'];
/** Outcomes a recorder may finish with ('running' is the live state, 'interrupted' is set by recovery). */
// 'interrupted' is also set by recovery on open, for a session whose recorder died without a word.
export type FinalOutcome = Exclude<SessionOutcome, 'running'>;

/**
 * The air during a session, as measured or assumed. Free-form beyond density so that a later sensor (humidity,
 * pressure) does not need a schema change.
 */
export interface AtmosphereRecord {
  density_kg_m3?: number;
  temperature_C?: number;
  pressure_Pa?: number;
  relative_humidity?: number;
  /** Where the numbers came from: "ISA 0 m", "measured", ... */
  source?: string;
  [key: string]: unknown;
}

/** Everything known when a session starts. All optional: an imported CSV may carry none of it. */
export interface SessionContext {
  title?: string;
  notes?: string;
  tags?: string[];
  rig?: RigSpec | null;
  calibration?: Calibration | null;
  atmosphere?: AtmosphereRecord | null;
  firmware?: DeviceIdentity | null;
  /** The sequence (sweep) definition that was run, as given to the sequence runner. */
  sequence?: unknown;
  /** The library parts mounted (exact revisions), linked in session_mounts; none for a rig from a file alone. */
  mount?: MountedPart[];
  /** Host time in ms since the epoch; default now. */
  started_at?: number;
}

/** A bench event as stored: the live event plus optional structured data (a trip's rule, value, limit, sample). */
export interface StoredEvent extends BenchEvent {
  data?: unknown;
}

export interface SessionSummary {
  id: number;
  title: string;
  notes: string;
  tags: string[];
  outcome: SessionOutcome;
  started_at: number;
  ended_at: number | null;
  rig_name: string | null;
  sample_count: number;
  point_count: number;
}

export interface SessionRecord extends SessionSummary {
  rig: RigSpec | null;
  calibration: Calibration | null;
  atmosphere: AtmosphereRecord | null;
  firmware: DeviceIdentity | null;
  sequence: unknown;
  /** The library parts the session ran with (slot, part id, revision, name), in slot order; [] when none. */
  mount: MountedPart[];
  points: OperatingPoint[];
  events: StoredEvent[];
}

export interface ListFilter {
  /** Every tag given must be on the session. */
  tag?: string | string[];
  /** Case-insensitive substring of the title or the notes. */
  text?: string;
  /** Exact rig name (from the rig snapshot). */
  rig?: string;
  /** Ran with this library part (any revision, or `partRevision` only). */
  part?: number;
  partRevision?: number;
  /** started_at >= from (ms since epoch). */
  from?: number;
  /** started_at < to (ms since epoch). */
  to?: number;
  outcome?: SessionOutcome | SessionOutcome[];
  limit?: number;
  offset?: number;
}

export type Decimation = { method: 'stride'; points: number } | { method: 'minmax'; points: number; channel?: SampleChannelName };

export type SampleChannelName = Exclude<keyof Sample, 't' | 'dt'>;

export interface SampleQuery {
  /** Host time window, ms since epoch (inclusive from, exclusive to). */
  from?: number;
  to?: number;
  decimate?: Decimation;
}

export interface SessionPatch {
  title?: string;
  notes?: string;
  addTags?: string[];
  removeTags?: string[];
}
