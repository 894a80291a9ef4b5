// Validation of the rig description (shape in rig-types.ts) and the geometry derived from it.
//
// A rig file is configuration: it is read once, checked completely, and unknown keys are errors, because a
// typo such as "bore_diamter_m" would otherwise silently fall back to something and give a confident wrong
// prediction. Each error names the field path and the rule it broke, so the message alone is enough to fix
// the file. The `limits` and `sim` sections belong to the interlocks and the virtual bench; here they are
// only required to be objects and are passed through untouched.

import type { DuctSpec, EscSpec, MotorSpec, PropellerSpec, RigSpec, SupplySpec } from './rig-types.js';

/** Range of exit-area ratio the ducted model is meant for (below 0.5 is a nozzle, above 1.6 never attaches). */
export const SIGMA_MIN = 0.5;
export const SIGMA_MAX = 1.6;

export class RigError extends Error {
  override readonly name = 'RigError';
  constructor(
    /** Dotted path of the offending field, e.g. "duct.bore_diameter_m"; "" for the whole document. */
    readonly path: string,
    /** The rule, e.g. "must be a positive number". */
    readonly rule: string,
  ) {
    super(path ? `${path}: ${rule}` : rule);
  }
}

type Obj = Record<string, unknown>;

function isObject(x: unknown): x is Obj {
  return typeof x === 'object' && x !== null && !Array.isArray(x);
}

function join(path: string, key: string): string {
  return path ? `${path}.${key}` : key;
}

function objectAt(x: unknown, path: string, allowed: readonly string[]): Obj {
  if (!isObject(x)) throw new RigError(path, 'must be an object');
  for (const key of Object.keys(x)) {
    if (!allowed.includes(key)) {
      throw new RigError(join(path, key), `unknown key (allowed: ${allowed.join(', ')})`);
    }
  }
  return x;
}

function numberAt(o: Obj, path: string, key: string, required: true): number;
function numberAt(o: Obj, path: string, key: string, required: false): number | undefined;
function numberAt(o: Obj, path: string, key: string, required: boolean): number | undefined {
  const p = join(path, key);
  const v = o[key];
  if (v === undefined) {
    if (required) throw new RigError(p, 'is required');
    return undefined;
  }
  if (typeof v !== 'number') throw new RigError(p, `must be a number, got ${typeof v === 'object' ? (v === null ? 'null' : 'object') : typeof v}`);
  if (!Number.isFinite(v)) throw new RigError(p, 'must be a finite number');
  return v;
}

function positive(p: string, v: number): number {
  if (!(v > 0)) throw new RigError(p, `must be positive (got ${v})`);
  return v;
}
function nonNegative(p: string, v: number): number {
  if (!(v >= 0)) throw new RigError(p, `must not be negative (got ${v})`);
  return v;
}
function within(p: string, v: number, lo: number, hi: number, unit = ''): number {
  if (!(v >= lo && v <= hi)) throw new RigError(p, `must be within ${lo}..${hi}${unit} (got ${v})`);
  return v;
}
function integer(p: string, v: number): number {
  if (!Number.isInteger(v)) throw new RigError(p, `must be a whole number (got ${v})`);
  return v;
}

function numberArray(o: Obj, path: string, key: string): number[] {
  const p = join(path, key);
  const v = o[key];
  if (v === undefined) throw new RigError(p, 'is required');
  if (!Array.isArray(v)) throw new RigError(p, 'must be an array of numbers');
  return v.map((x, i) => {
    if (typeof x !== 'number' || !Number.isFinite(x)) throw new RigError(`${p}[${i}]`, 'must be a finite number');
    return x;
  });
}

function increasing(p: string, xs: number[]): void {
  for (let i = 1; i < xs.length; i++) {
    if (!(xs[i] > xs[i - 1])) throw new RigError(`${p}[${i}]`, 'must be strictly increasing');
  }
}

export function parsePropeller(x: unknown): PropellerSpec {
  const path = 'propeller';
  const o = objectAt(x, path, ['diameter_m', 'pitch_m', 'blades', 'geometry', 'static_table', 'mass_kg']);
  const diameter_m = within(`${path}.diameter_m`, positive(`${path}.diameter_m`, numberAt(o, path, 'diameter_m', true)), 0.02, 3, ' m');
  const pitch_m = positive(`${path}.pitch_m`, numberAt(o, path, 'pitch_m', true));
  // The default blade twist comes from pitch / diameter; outside this range a fixed-pitch propeller is
  // either a flat plate or a screw and the airfoil model does not apply.
  const pd = pitch_m / diameter_m;
  if (pd < 0.1 || pd > 2) {
    throw new RigError(`${path}.pitch_m`, `pitch / diameter must be within 0.1..2 (got ${pd.toFixed(3)})`);
  }
  const blades = integer(`${path}.blades`, numberAt(o, path, 'blades', true));
  within(`${path}.blades`, blades, 2, 8);
  const out: PropellerSpec = { diameter_m, pitch_m, blades };

  if (o.geometry !== undefined) {
    const gp = `${path}.geometry`;
    const g = objectAt(o.geometry, gp, ['r_over_R', 'chord_m', 'twist_deg']);
    const r = numberArray(g, gp, 'r_over_R');
    const c = numberArray(g, gp, 'chord_m');
    const t = numberArray(g, gp, 'twist_deg');
    if (r.length < 2) throw new RigError(`${gp}.r_over_R`, 'must have at least 2 stations');
    if (c.length !== r.length) throw new RigError(`${gp}.chord_m`, `must have the same length as r_over_R (${r.length})`);
    if (t.length !== r.length) throw new RigError(`${gp}.twist_deg`, `must have the same length as r_over_R (${r.length})`);
    r.forEach((v, i) => within(`${gp}.r_over_R[${i}]`, v, 0.05, 1));
    increasing(`${gp}.r_over_R`, r);
    c.forEach((v, i) => {
      positive(`${gp}.chord_m[${i}]`, v);
      if (v > diameter_m / 2) throw new RigError(`${gp}.chord_m[${i}]`, `must not exceed the radius (${diameter_m / 2})`);
    });
    t.forEach((v, i) => within(`${gp}.twist_deg[${i}]`, v, -10, 80, ' deg'));
    out.geometry = { r_over_R: r, chord_m: c, twist_deg: t };
  }

  if (o.static_table !== undefined) {
    const tp = `${path}.static_table`;
    const s = objectAt(o.static_table, tp, ['rpm', 'ct', 'cp']);
    const rpm = numberArray(s, tp, 'rpm');
    const ct = numberArray(s, tp, 'ct');
    const cp = numberArray(s, tp, 'cp');
    if (rpm.length < 1) throw new RigError(`${tp}.rpm`, 'must have at least 1 entry');
    if (ct.length !== rpm.length) throw new RigError(`${tp}.ct`, `must have the same length as rpm (${rpm.length})`);
    if (cp.length !== rpm.length) throw new RigError(`${tp}.cp`, `must have the same length as rpm (${rpm.length})`);
    rpm.forEach((v, i) => positive(`${tp}.rpm[${i}]`, v));
    increasing(`${tp}.rpm`, rpm);
    ct.forEach((v, i) => within(`${tp}.ct[${i}]`, v, 1e-4, 1));
    cp.forEach((v, i) => within(`${tp}.cp[${i}]`, v, 1e-5, 1));
    out.static_table = { rpm, ct, cp };
  }

  const mass = numberAt(o, path, 'mass_kg', false);
  if (mass !== undefined) out.mass_kg = nonNegative(`${path}.mass_kg`, mass);
  return out;
}

export function parseMotor(x: unknown): MotorSpec {
  const path = 'motor';
  const o = objectAt(x, path, ['kv_rpm_per_v', 'resistance_ohm', 'no_load_current_a', 'no_load_voltage_v', 'mass_kg']);
  const kv = within(`${path}.kv_rpm_per_v`, numberAt(o, path, 'kv_rpm_per_v', true), 1, 100000, ' rpm/V');
  const r = positive(`${path}.resistance_ohm`, numberAt(o, path, 'resistance_ohm', true));
  within(`${path}.resistance_ohm`, r, 0, 100, ' ohm');
  const i0 = nonNegative(`${path}.no_load_current_a`, numberAt(o, path, 'no_load_current_a', true));
  const v0 = positive(`${path}.no_load_voltage_v`, numberAt(o, path, 'no_load_voltage_v', true));
  if (i0 * r >= v0) {
    throw new RigError(`${path}.no_load_current_a`, `times resistance_ohm must be below no_load_voltage_v (${v0})`);
  }
  const mass = nonNegative(`${path}.mass_kg`, numberAt(o, path, 'mass_kg', true));
  return { kv_rpm_per_v: kv, resistance_ohm: r, no_load_current_a: i0, no_load_voltage_v: v0, mass_kg: mass };
}

export function parseEsc(x: unknown): EscSpec {
  const path = 'esc';
  const o = objectAt(x, path, ['efficiency', 'resistance_ohm', 'throttle_map']);
  const eff = numberAt(o, path, 'efficiency', false);
  const res = numberAt(o, path, 'resistance_ohm', false);
  if (eff !== undefined && res !== undefined) {
    throw new RigError(`${path}.resistance_ohm`, 'give either efficiency or resistance_ohm, not both');
  }
  const out: EscSpec = {};
  if (eff !== undefined) {
    if (!(eff > 0 && eff <= 1)) throw new RigError(`${path}.efficiency`, `must be within 0..1 and above 0 (got ${eff})`);
    out.efficiency = eff;
  }
  if (res !== undefined) out.resistance_ohm = within(`${path}.resistance_ohm`, nonNegative(`${path}.resistance_ohm`, res), 0, 10, ' ohm');
  if (o.throttle_map !== undefined) {
    if (o.throttle_map !== 'voltage') throw new RigError(`${path}.throttle_map`, 'must be "voltage"');
    out.throttle_map = 'voltage';
  }
  return out;
}

function parseDuct(x: unknown, propDiameter: number): DuctSpec | null {
  const path = 'duct';
  if (x === null) return null;
  const o = objectAt(x, path, ['bore_diameter_m', 'inlet_lip_radius_m', 'exit_diameter_m', 'length_m', 'mass_kg']);
  const bore = positive(`${path}.bore_diameter_m`, numberAt(o, path, 'bore_diameter_m', true));
  if (!(bore > propDiameter)) {
    throw new RigError(`${path}.bore_diameter_m`, `must be larger than propeller.diameter_m (${propDiameter})`);
  }
  if (bore > 1.5 * propDiameter) {
    throw new RigError(`${path}.bore_diameter_m`, `must be at most 1.5 x propeller.diameter_m (${1.5 * propDiameter}); a wider ring is not a duct`);
  }
  const lip = nonNegative(`${path}.inlet_lip_radius_m`, numberAt(o, path, 'inlet_lip_radius_m', true));
  if (lip > bore / 2) throw new RigError(`${path}.inlet_lip_radius_m`, `must not exceed half the bore (${bore / 2})`);
  const exit = positive(`${path}.exit_diameter_m`, numberAt(o, path, 'exit_diameter_m', true));
  const sigma = (exit / propDiameter) ** 2;
  // A relative slack of 1e-9 lets an exit computed as D * sqrt(sigma) at the range ends through round-off.
  if (sigma < SIGMA_MIN * (1 - 1e-9) || sigma > SIGMA_MAX * (1 + 1e-9)) {
    throw new RigError(
      `${path}.exit_diameter_m`,
      `exit-area ratio sigma = (exit / propeller diameter)^2 must be within ${SIGMA_MIN}..${SIGMA_MAX} (got ${sigma.toFixed(3)})`,
    );
  }
  const length = positive(`${path}.length_m`, numberAt(o, path, 'length_m', true));
  if (length > 3 * propDiameter) throw new RigError(`${path}.length_m`, `must be at most 3 x propeller.diameter_m (${3 * propDiameter})`);
  const mass = nonNegative(`${path}.mass_kg`, numberAt(o, path, 'mass_kg', true));
  return { bore_diameter_m: bore, inlet_lip_radius_m: lip, exit_diameter_m: exit, length_m: length, mass_kg: mass };
}

export function parseSupply(x: unknown): SupplySpec {
  const path = 'supply';
  const o = objectAt(x, path, ['cells', 'voltage_v', 'internal_resistance_ohm', 'capacity_mah']);
  const cells = numberAt(o, path, 'cells', false);
  const voltage = numberAt(o, path, 'voltage_v', false);
  if (cells === undefined && voltage === undefined) throw new RigError(`${path}.cells`, 'give either cells or voltage_v');
  if (cells !== undefined && voltage !== undefined) throw new RigError(`${path}.voltage_v`, 'give either cells or voltage_v, not both');
  const out: SupplySpec = {
    internal_resistance_ohm: within(
      `${path}.internal_resistance_ohm`,
      nonNegative(`${path}.internal_resistance_ohm`, numberAt(o, path, 'internal_resistance_ohm', true)),
      0,
      10,
      ' ohm',
    ),
  };
  if (cells !== undefined) out.cells = within(`${path}.cells`, integer(`${path}.cells`, cells), 1, 14);
  if (voltage !== undefined) out.voltage_v = within(`${path}.voltage_v`, positive(`${path}.voltage_v`, voltage), 0, 100, ' V');
  const cap = numberAt(o, path, 'capacity_mah', false);
  if (cap !== undefined) out.capacity_mah = positive(`${path}.capacity_mah`, cap);
  return out;
}

const ROOT_KEYS = ['name', 'description', 'propeller', 'motor', 'esc', 'duct', 'supply', 'limits', 'sim'] as const;

/** Validate a parsed JSON rig description. Throws RigError naming the field and the rule. */
export function parseRig(json: unknown): RigSpec {
  const o = objectAt(json, '', ROOT_KEYS);
  if (typeof o.name !== 'string' || o.name.trim() === '') {
    throw new RigError('name', o.name === undefined ? 'is required' : 'must be a non-empty string');
  }
  if (o.description !== undefined && typeof o.description !== 'string') throw new RigError('description', 'must be a string');
  for (const key of ['propeller', 'motor', 'esc', 'supply'] as const) {
    if (o[key] === undefined) throw new RigError(key, 'is required');
  }
  if (!('duct' in o)) throw new RigError('duct', 'is required (use null for an open propeller)');
  const propeller = parsePropeller(o.propeller);
  const rig: RigSpec = {
    name: o.name,
    propeller,
    motor: parseMotor(o.motor),
    esc: parseEsc(o.esc),
    duct: parseDuct(o.duct, propeller.diameter_m),
    supply: parseSupply(o.supply),
  };
  if (o.description !== undefined) rig.description = o.description as string;
  if (o.limits !== undefined) {
    if (!isObject(o.limits)) throw new RigError('limits', 'must be an object');
    rig.limits = o.limits as Record<string, number>;
  }
  if (o.sim !== undefined) {
    if (!isObject(o.sim)) throw new RigError('sim', 'must be an object');
    rig.sim = o.sim;
  }
  return rig;
}

export interface RigGeometry {
  /** Rotor disk area from the propeller diameter, m^2. */
  diskArea_m2: number;
  radius_m: number;
  /** Radial gap between blade tip and duct bore; null for an open propeller. */
  tipClearance_mm: number | null;
  /** The same gap as a percentage of the propeller radius. */
  tipClearance_pctRadius: number | null;
  /** Exit area over rotor disk area; null for an open propeller. */
  sigma: number | null;
  /** Diffuser half-angle from bore to exit over the duct length, degrees; null for an open propeller. */
  diffuserHalfAngle_deg: number | null;
}

/** Geometry derived from a (validated) rig. */
export function rigGeometry(rig: Pick<RigSpec, 'propeller' | 'duct'>): RigGeometry {
  const D = rig.propeller.diameter_m;
  const R = D / 2;
  const diskArea_m2 = (Math.PI * D * D) / 4;
  const d = rig.duct;
  if (!d) {
    return { diskArea_m2, radius_m: R, tipClearance_mm: null, tipClearance_pctRadius: null, sigma: null, diffuserHalfAngle_deg: null };
  }
  const gap = (d.bore_diameter_m - D) / 2;
  return {
    diskArea_m2,
    radius_m: R,
    tipClearance_mm: gap * 1000,
    tipClearance_pctRadius: (gap / R) * 100,
    sigma: (d.exit_diameter_m / D) ** 2,
    diffuserHalfAngle_deg: (Math.atan2((d.exit_diameter_m - d.bore_diameter_m) / 2, d.length_m) * 180) / Math.PI,
  };
}
