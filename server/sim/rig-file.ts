// Reads a rig file for the virtual bench. The full rig validator belongs to the model (server/model/rig.ts),
// which the bench must not depend on (its truth is kept separate from the predictor on purpose), so this
// checks only the fields the simulator uses, each error naming the field; the `sim` section is checked
// completely by sim-constants.ts.

import { readFileSync } from 'node:fs';
import type { DuctSpec, RigSpec } from '../model/rig-types.js';
import { parseSimConstants, SimConfigError } from './sim-constants.js';

export class SimRigError extends Error {
  override name = 'SimRigError';
}

type Obj = Record<string, unknown>;

function obj(x: unknown, path: string): Obj {
  if (typeof x !== 'object' || x === null || Array.isArray(x)) throw new SimRigError(`${path} must be an object`);
  return x as Obj;
}

function num(o: Obj, path: string, key: string, rule: { min?: number; max?: number; gt?: number; int?: boolean } = {}, optional = false): number | undefined {
  const v = o[key];
  const p = `${path}.${key}`;
  if (v === undefined) {
    if (optional) return undefined;
    throw new SimRigError(`${p} is required`);
  }
  if (typeof v !== 'number' || !Number.isFinite(v)) throw new SimRigError(`${p} must be a finite number`);
  if (rule.gt !== undefined && !(v > rule.gt)) throw new SimRigError(`${p} = ${v} must be greater than ${rule.gt}`);
  if (rule.min !== undefined && v < rule.min) throw new SimRigError(`${p} = ${v} must be at least ${rule.min}`);
  if (rule.max !== undefined && v > rule.max) throw new SimRigError(`${p} = ${v} must be at most ${rule.max}`);
  if (rule.int && !Number.isInteger(v)) throw new SimRigError(`${p} must be an integer`);
  return v;
}

/** Checks a parsed rig document for what the virtual bench needs; returns it typed. `where` prefixes field names. */
export function validateSimRig(doc: unknown, where = 'rig'): RigSpec {
  const r = obj(doc, where);
  if (typeof r.name !== 'string' || r.name.trim() === '') throw new SimRigError(`${where}.name must be a non-empty string`);
  const prop = obj(r.propeller, `${where}.propeller`);
  num(prop, `${where}.propeller`, 'diameter_m', { gt: 0, max: 3 });
  num(prop, `${where}.propeller`, 'pitch_m', { gt: 0, max: 3 });
  num(prop, `${where}.propeller`, 'blades', { min: 2, max: 8, int: true });
  num(prop, `${where}.propeller`, 'mass_kg', { gt: 0, max: 5 }, true);
  const motor = obj(r.motor, `${where}.motor`);
  num(motor, `${where}.motor`, 'kv_rpm_per_v', { gt: 0, max: 100000 });
  num(motor, `${where}.motor`, 'resistance_ohm', { gt: 0, max: 100 });
  num(motor, `${where}.motor`, 'no_load_current_a', { min: 0, max: 100 });
  num(motor, `${where}.motor`, 'no_load_voltage_v', { gt: 0, max: 1000 });
  num(motor, `${where}.motor`, 'mass_kg', { gt: 0, max: 50 });
  const esc = obj(r.esc, `${where}.esc`);
  num(esc, `${where}.esc`, 'efficiency', { gt: 0, max: 1 }, true);
  num(esc, `${where}.esc`, 'resistance_ohm', { min: 0, max: 10 }, true);
  if (esc.throttle_map !== undefined && esc.throttle_map !== 'voltage') throw new SimRigError(`${where}.esc.throttle_map must be "voltage"`);
  if (r.duct === undefined) throw new SimRigError(`${where}.duct is required (null for an open rotor)`);
  if (r.duct !== null) {
    const d = obj(r.duct, `${where}.duct`);
    const bore = num(d, `${where}.duct`, 'bore_diameter_m', { gt: 0, max: 5 })!;
    num(d, `${where}.duct`, 'inlet_lip_radius_m', { min: 0, max: 2 });
    num(d, `${where}.duct`, 'exit_diameter_m', { gt: 0, max: 5 });
    num(d, `${where}.duct`, 'length_m', { gt: 0, max: 5 });
    num(d, `${where}.duct`, 'mass_kg', { min: 0, max: 50 });
    if (bore < (prop.diameter_m as number)) {
      throw new SimRigError(`${where}.duct.bore_diameter_m = ${bore} is smaller than the propeller (${String(prop.diameter_m)} m)`);
    }
  }
  const sup = obj(r.supply, `${where}.supply`);
  const cells = num(sup, `${where}.supply`, 'cells', { min: 1, max: 24, int: true }, true);
  const volts = num(sup, `${where}.supply`, 'voltage_v', { gt: 0, max: 200 }, true);
  if ((cells === undefined) === (volts === undefined)) throw new SimRigError(`${where}.supply needs exactly one of cells or voltage_v`);
  num(sup, `${where}.supply`, 'internal_resistance_ohm', { min: 0, max: 10 });
  num(sup, `${where}.supply`, 'capacity_mah', { gt: 0, max: 1e6 }, true);
  try {
    parseSimConstants(r.sim, `${where}.sim`);
  } catch (e) {
    if (e instanceof SimConfigError) throw new SimRigError(e.message);
    throw e;
  }
  return { ...(r as unknown as RigSpec), duct: (r.duct as DuctSpec | null) ?? null };
}

/** Reads and checks a JSON rig file (synchronously: it is configuration, read once at start-up). */
export function loadSimRig(path: string): RigSpec {
  let text: string;
  try {
    text = readFileSync(path, 'utf8');
  } catch (e) {
    throw new SimRigError(`cannot read rig file ${path}: ${(e as Error).message}`);
  }
  let doc: unknown;
  try {
    doc = JSON.parse(text);
  } catch (e) {
    throw new SimRigError(`rig file ${path} is not valid JSON: ${(e as Error).message}`);
  }
  return validateSimRig(doc, 'rig');
}
