// Validation of a part document: the kind's own fields are checked by the same rules as its section of a rig
// file (server/model/rig.ts), so a part and a rig file can never disagree about what a valid propeller is, and
// every error names its field ("duct.inlet_lip_radius_m: must not exceed half the bore"). What depends on two
// parts at once (a duct's bore against the propeller's diameter) is checked when they are mounted together.

import { LimitsError, parseLimits } from '../interlocks/limits.js';
import { parseEsc, parseMotor, parsePropeller, parseSupply, RigError, SIGMA_MAX, SIGMA_MIN } from '../model/rig.js';
import type { DuctSpec } from '../model/rig-types.js';
import { MAX_PART_NAME, PART_KINDS, type PartDocument, type PartKind, type PartSpecs } from './types.js';

export const MAX_NOTES_LENGTH = 4000;
/** Largest bore over propeller diameter a duct may have (the rig's own rule, see parseDuct in rig.ts). */
const MAX_BORE_OVER_DIAMETER = 1.5;

type Obj = Record<string, unknown>;
const isObject = (x: unknown): x is Obj => typeof x === 'object' && x !== null && !Array.isArray(x);

export function parseKind(x: unknown): PartKind {
  if (typeof x !== 'string' || !(PART_KINDS as readonly string[]).includes(x)) {
    throw new RigError('kind', `must be one of ${PART_KINDS.join(', ')} (got ${JSON.stringify(x)})`);
  }
  return x as PartKind;
}

/** A user's name for a part: trimmed, 1..80 characters, no control characters. */
export function parseName(x: unknown, path = 'name'): string {
  if (typeof x !== 'string') throw new RigError(path, x === undefined ? 'is required' : 'must be a string');
  const t = x.trim();
  if (t === '') throw new RigError(path, 'must not be empty');
  if (t.length > MAX_PART_NAME) throw new RigError(path, `must be at most ${MAX_PART_NAME} characters`);
  // eslint-disable-next-line no-control-regex
  if (/[\u0000-\u001f\u007f]/.test(t)) throw new RigError(path, 'must not contain control characters');
  return t;
}

/**
 * A duct on its own: its fields and the rules that hold for any propeller it could take. The rules that need
 * the propeller (bore above its diameter, the exit-area ratio) are the rig's, applied at mount time.
 */
function parseDuctAlone(x: unknown): DuctSpec {
  const path = 'duct';
  const keys = ['bore_diameter_m', 'inlet_lip_radius_m', 'exit_diameter_m', 'length_m', 'mass_kg'];
  if (!isObject(x)) throw new RigError(path, 'must be an object');
  for (const k of Object.keys(x)) if (!keys.includes(k)) throw new RigError(`${path}.${k}`, `unknown key (allowed: ${[...keys, 'notes', 'limits'].join(', ')})`);
  const num = (k: string): number => {
    const v = x[k];
    if (v === undefined) throw new RigError(`${path}.${k}`, 'is required');
    if (typeof v !== 'number' || !Number.isFinite(v)) throw new RigError(`${path}.${k}`, 'must be a finite number');
    return v;
  };
  const bore = num('bore_diameter_m');
  if (!(bore > 0 && bore <= 3 * MAX_BORE_OVER_DIAMETER)) throw new RigError(`${path}.bore_diameter_m`, `must be within 0..${3 * MAX_BORE_OVER_DIAMETER} m and above 0 (got ${bore})`);
  const lip = num('inlet_lip_radius_m');
  if (!(lip >= 0)) throw new RigError(`${path}.inlet_lip_radius_m`, `must not be negative (got ${lip})`);
  if (lip > bore / 2) throw new RigError(`${path}.inlet_lip_radius_m`, `must not exceed half the bore (${bore / 2})`);
  const exit = num('exit_diameter_m');
  // sigma = (exit / D)^2 within SIGMA_MIN..SIGMA_MAX for some D in [bore / 1.5, bore): exit / bore must lie
  // between sqrt(SIGMA_MIN) / 1.5 and sqrt(SIGMA_MAX), or no propeller fits.
  const lo = Math.sqrt(SIGMA_MIN) / MAX_BORE_OVER_DIAMETER;
  const hi = Math.sqrt(SIGMA_MAX);
  if (!(exit > 0) || exit / bore < lo || exit / bore > hi) {
    throw new RigError(`${path}.exit_diameter_m`, `exit / bore must be within ${lo.toFixed(3)}..${hi.toFixed(3)} (got ${(exit / bore).toFixed(3)}): no propeller gives an exit-area ratio within ${SIGMA_MIN}..${SIGMA_MAX}`);
  }
  const length = num('length_m');
  if (!(length > 0)) throw new RigError(`${path}.length_m`, `must be positive (got ${length})`);
  if (length > 3 * bore) throw new RigError(`${path}.length_m`, `must be at most 3 x bore_diameter_m (${3 * bore})`);
  const mass = num('mass_kg');
  if (!(mass >= 0)) throw new RigError(`${path}.mass_kg`, `must not be negative (got ${mass})`);
  return { bore_diameter_m: bore, inlet_lip_radius_m: lip, exit_diameter_m: exit, length_m: length, mass_kg: mass };
}

const SPEC_PARSERS: { [K in PartKind]: (x: unknown) => PartSpecs[K] } = {
  propeller: parsePropeller,
  motor: parseMotor,
  esc: parseEsc,
  supply: parseSupply,
  duct: parseDuctAlone,
};

/** A part's own host limits: known keys, in range (checked over the defaults, so cross-key rules apply too). */
export function parsePartLimits(x: unknown, path: string): Record<string, number> {
  if (x === undefined || x === null) return {};
  if (!isObject(x)) throw new RigError(path, 'must be an object');
  try {
    parseLimits(x, path);
  } catch (err) {
    if (!(err instanceof LimitsError)) throw err;
    const m = /^([^:]+): (.*)$/.exec(err.message);
    throw m ? new RigError(m[1], m[2]) : new RigError(path, err.message);
  }
  return { ...(x as Record<string, number>) };
}

/**
 * Validates a part document: the kind's fields as in a rig file, plus optional `notes` (text) and `limits`
 * (host limits). Throws RigError naming the field and the rule.
 */
export function parsePartDocument<K extends PartKind>(kind: K, raw: unknown): PartDocument<K> {
  if (!isObject(raw)) throw new RigError(kind, 'must be an object');
  const { notes, limits, ...fields } = raw;
  if (notes !== undefined && typeof notes !== 'string') throw new RigError(`${kind}.notes`, 'must be a string');
  if (typeof notes === 'string' && notes.length > MAX_NOTES_LENGTH) throw new RigError(`${kind}.notes`, `must be at most ${MAX_NOTES_LENGTH} characters`);
  const spec = SPEC_PARSERS[kind](fields) as PartSpecs[K];
  return { spec, notes: typeof notes === 'string' ? notes : '', limits: parsePartLimits(limits, `${kind}.limits`) };
}
