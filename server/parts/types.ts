// Shapes of the parts library: the five kinds of hardware a bench mounts, a part's revisions, and a mount
// (which revision of which part sits in each slot). Pure types and the list of kinds; validation lives in
// validate.ts, the tables in the session store's schema, the queries in library.ts.

import type { DuctSpec, EscSpec, MotorSpec, PropellerSpec, SupplySpec } from '../model/rig-types.js';

/** The slots of a bench, in the order a rig file lists them. A duct slot may be empty (an open propeller). */
export const PART_KINDS = ['propeller', 'motor', 'esc', 'supply', 'duct'] as const;
export type PartKind = (typeof PART_KINDS)[number];

/** Longest name of a part (or of a mount), in characters. */
export const MAX_PART_NAME = 80;

export interface PartSpecs {
  propeller: PropellerSpec;
  motor: MotorSpec;
  esc: EscSpec;
  supply: SupplySpec;
  duct: DuctSpec;
}

/**
 * What a person writes to add or revise a part: the kind's own fields (the same as its section of a rig file),
 * plus free notes and the part's own host limits (a motor's temperature, a pack's cell floor ...).
 */
export interface PartDocument<K extends PartKind = PartKind> {
  spec: PartSpecs[K];
  notes: string;
  /** Host limits this part asks for (keys of the interlocks' limits); the strictest of the mount is in force. */
  limits: Record<string, number>;
}

/** One revision of a part. Revisions are never changed once written: an edit adds the next one. */
export interface PartRevision<K extends PartKind = PartKind> extends PartDocument<K> {
  id: number;
  kind: K;
  /** The user's name for the part, unique among parts of its kind that are not retired. */
  name: string;
  revision: number;
  /** The newest revision of this part (equal to `revision` when this is the newest). */
  latest: number;
  /** When this revision was written (ms since epoch). */
  created_at: number;
  /** When the part was retired (it can no longer be mounted; sessions keep it), or null. */
  retired_at: number | null;
  /** Recorded sessions that ran with this revision. */
  used_by: number;
}

/** A part in a slot of a recorded session or a mount: enough to find the exact revision again. */
export interface MountedPart {
  slot: PartKind;
  part_id: number;
  revision: number;
  name: string;
}

/** Which parts a mount asks for: a part id per slot (latest revision), the duct null for an open propeller. */
export type MountRequest = { [K in Exclude<PartKind, 'duct'>]: number } & { duct: number | null };
