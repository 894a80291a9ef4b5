import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { parseRig, rigGeometry, RigError } from '../server/model/index.js';

const load = (name: string): unknown => JSON.parse(readFileSync(new URL(`../examples/rigs/${name}`, import.meta.url), 'utf8'));
const open = load('quorrel-open.json') as Record<string, any>;
const duct = load('quorrel-duct.json') as Record<string, any>;

/** A deep copy of the ducted example with one change applied. */
function variant(change: (r: Record<string, any>) => void, base: Record<string, any> = duct): unknown {
  const r = structuredClone(base);
  change(r);
  return r;
}

function errorOf(json: unknown): RigError {
  try {
    parseRig(json);
  } catch (e) {
    if (e instanceof RigError) return e;
    throw e;
  }
  throw new Error('parseRig accepted the rig');
}

describe('parseRig on the examples', () => {
  it('accepts both Quorrel rigs and keeps their values', () => {
    const o = parseRig(open);
    const d = parseRig(duct);
    expect(o.duct).toBeNull();
    expect(d.duct?.bore_diameter_m).toBe(0.2565);
    expect(d.propeller).toEqual(o.propeller);
    expect(d.motor).toEqual(o.motor);
  });

  it('derives tip clearance, sigma and disk area', () => {
    const g = rigGeometry(parseRig(duct));
    expect(g.tipClearance_mm).toBeCloseTo(1.25, 9);
    expect(g.tipClearance_pctRadius).toBeCloseTo((1.25 / 127) * 100, 9);
    expect(g.sigma).toBeCloseTo(1.1, 3);
    expect(g.diskArea_m2).toBeCloseTo((Math.PI * 0.254 ** 2) / 4, 12);
    const go = rigGeometry(parseRig(open));
    expect(go.tipClearance_mm).toBeNull();
    expect(go.sigma).toBeNull();
  });
});

describe('parseRig errors name the field and the rule', () => {
  const cases: [string, unknown, string, RegExp][] = [
    ['bore narrower than the propeller', variant((r) => (r.duct.bore_diameter_m = 0.25)), 'duct.bore_diameter_m', /must be larger than propeller\.diameter_m \(0\.254\)/],
    ['typo in a key', variant((r) => { r.duct.bore_diamter_m = r.duct.bore_diameter_m; delete r.duct.bore_diameter_m; }), 'duct.bore_diamter_m', /unknown key/],
    ['unknown top-level key', variant((r) => (r.limts = {})), 'limts', /unknown key/],
    ['missing field', variant((r) => delete r.motor.kv_rpm_per_v), 'motor.kv_rpm_per_v', /is required/],
    ['missing duct', variant((r) => delete r.duct), 'duct', /required \(use null/],
    ['wrong type', variant((r) => (r.propeller.diameter_m = '0.254')), 'propeller.diameter_m', /must be a number, got string/],
    ['non-finite number', variant((r) => (r.motor.resistance_ohm = Number.POSITIVE_INFINITY)), 'motor.resistance_ohm', /finite/],
    ['NaN', variant((r) => (r.duct.length_m = Number.NaN)), 'duct.length_m', /finite/],
    ['negative duct mass', variant((r) => (r.duct.mass_kg = -0.01)), 'duct.mass_kg', /must not be negative/],
    ['negative motor mass', variant((r) => (r.motor.mass_kg = -1)), 'motor.mass_kg', /must not be negative/],
    ['negative propeller mass', variant((r) => (r.propeller.mass_kg = -1)), 'propeller.mass_kg', /must not be negative/],
    ['sigma too large', variant((r) => (r.duct.exit_diameter_m = 0.34)), 'duct.exit_diameter_m', /sigma .* within 0\.5\.\.1\.6 \(got 1\.792\)/],
    ['sigma too small', variant((r) => (r.duct.exit_diameter_m = 0.17)), 'duct.exit_diameter_m', /within 0\.5\.\.1\.6/],
    ['negative lip radius', variant((r) => (r.duct.inlet_lip_radius_m = -0.001)), 'duct.inlet_lip_radius_m', /must not be negative/],
    ['one blade', variant((r) => (r.propeller.blades = 1)), 'propeller.blades', /within 2\.\.8/],
    ['fractional blades', variant((r) => (r.propeller.blades = 2.5)), 'propeller.blades', /whole number/],
    ['esc with both loss forms', variant((r) => (r.esc.resistance_ohm = 0.01)), 'esc.resistance_ohm', /either efficiency or resistance_ohm/],
    ['esc efficiency above 1', variant((r) => (r.esc.efficiency = 1.2)), 'esc.efficiency', /within 0\.\.1/],
    ['supply with neither cells nor voltage', variant((r) => delete r.supply.cells), 'supply.cells', /either cells or voltage_v/],
    ['limits not an object', variant((r) => (r.limits = 5)), 'limits', /must be an object/],
    ['sim not an object', variant((r) => (r.sim = [1])), 'sim', /must be an object/],
    ['empty name', variant((r) => (r.name = '')), 'name', /non-empty/],
    ['document not an object', [], '', /must be an object/],
    ['geometry arrays of different length', variant((r) => (r.propeller.geometry = { r_over_R: [0.2, 1], chord_m: [0.02], twist_deg: [20, 8] })), 'propeller.geometry.chord_m', /same length/],
    ['geometry stations not increasing', variant((r) => (r.propeller.geometry = { r_over_R: [0.5, 0.3], chord_m: [0.02, 0.02], twist_deg: [20, 8] })), 'propeller.geometry.r_over_R[1]', /strictly increasing/],
  ];
  for (const [what, json, path, rule] of cases) {
    it(what, () => {
      const e = errorOf(json);
      expect(e.path).toBe(path);
      expect(e.message).toMatch(rule);
      expect(e.message.startsWith(path ? `${path}: ` : '')).toBe(true);
    });
  }

  it('passes limits and sim through untouched', () => {
    const r = parseRig(variant((x) => { x.limits = { max_current_a: 30 }; x.sim = { anything: { nested: true } }; }));
    expect(r.limits).toEqual({ max_current_a: 30 });
    expect(r.sim).toEqual({ anything: { nested: true } });
  });
});
