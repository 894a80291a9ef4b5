// The parts library in the session store: field-named validation errors (the rig file's own rules), revisions
// that are never changed (an edit adds the next, the database refuses an update), sessions that keep the
// revision they ran with after the part is revised, retiring, rig files in and out (examples/rigs), the
// migration from a v3 file, and the limits a mount puts in force (the stricter of two wins).

import { mkdirSync, readFileSync } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import Database from 'better-sqlite3';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import { LIMIT_KEYS } from '../server/interlocks/limits.js';
import { parseRig, rigGeometry } from '../server/model/rig.js';
import { mountedParts, PartRefused, PartsLibrary } from '../server/parts/library.js';
import { combineLimits, LimitConflict, STRICTER } from '../server/parts/limits.js';
import { MountService } from '../server/parts/mount.js';
import { migrate, SCHEMA_VERSION, schemaVersion } from '../server/store/schema.js';
import { SessionStore } from '../server/store/store.js';

const rigFile = (name: string) => parseRig(JSON.parse(readFileSync(new URL(`../examples/rigs/${name}.json`, import.meta.url), 'utf8')));
const PROP = { diameter_m: 0.254, pitch_m: 0.1143, blades: 2 };
const MOTOR = { kv_rpm_per_v: 860, resistance_ohm: 0.115, no_load_current_a: 0.6, no_load_voltage_v: 10, mass_kg: 0.056 };
const DUCT = { bore_diameter_m: 0.2565, inlet_lip_radius_m: 0.012, exit_diameter_m: 0.2664, length_m: 0.09, mass_kg: 0.085 };

let dir: string;
let store: SessionStore;
let lib: PartsLibrary;
beforeEach(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-parts-'));
  store = SessionStore.open(dir);
  lib = new PartsLibrary(store.db);
});
afterEach(async () => {
  store.close();
  await rm(dir, { recursive: true, force: true });
});

describe('validation', () => {
  const bad: [string, string, unknown, RegExp][] = [
    ['propeller', 'no diameter', { pitch_m: 0.1, blades: 2 }, /^propeller\.diameter_m: is required$/],
    ['propeller', 'a typo', { ...PROP, diamter_m: 0.25 }, /^propeller\.diamter_m: unknown key/],
    ['propeller', 'one blade', { ...PROP, blades: 1 }, /^propeller\.blades: must be within 2\.\.8/],
    ['motor', 'no-load drop above the voltage', { ...MOTOR, no_load_current_a: 100 }, /^motor\.no_load_current_a: times resistance_ohm must be below/],
    ['esc', 'both efficiency and resistance', { efficiency: 0.9, resistance_ohm: 0.01 }, /^esc\.resistance_ohm: give either/],
    ['supply', 'neither cells nor voltage', { internal_resistance_ohm: 0.05 }, /^supply\.cells: give either cells or voltage_v/],
    ['duct', 'a lip wider than half the bore', { ...DUCT, inlet_lip_radius_m: 0.2 }, /^duct\.inlet_lip_radius_m: must not exceed half the bore/],
    ['duct', 'an exit no propeller fits', { ...DUCT, exit_diameter_m: 0.5 }, /^duct\.exit_diameter_m: exit \/ bore must be within/],
    ['duct', 'a negative mass', { ...DUCT, mass_kg: -1 }, /^duct\.mass_kg: must not be negative/],
    ['motor', 'a mistyped limit', { ...MOTOR, limits: { max_tmep_c: 80 } }, /^motor\.limits\.max_tmep_c: unknown limit/],
    ['motor', 'a limit out of range', { ...MOTOR, limits: { max_temp_c: 5 } }, /^motor\.limits\.max_temp_c: 5 is outside/],
    ['duct', 'notes that are not text', { ...DUCT, notes: 3 }, /^duct\.notes: must be a string$/],
  ];
  for (const [kind, what, doc, msg] of bad) {
    it(`refuses ${kind} with ${what}, naming the field`, () => {
      expect(() => lib.add(kind as never, 'x', doc)).toThrow(msg);
      expect(lib.list()).toHaveLength(0);
    });
  }

  it('refuses an empty name, and a second active part of the same kind and name', () => {
    expect(() => lib.add('duct', '  ', DUCT)).toThrow(/^name: must not be empty$/);
    lib.add('duct', 'KD-1', DUCT);
    expect(() => lib.add('duct', 'KD-1', DUCT)).toThrow(PartRefused);
    // another kind may use the name
    expect(lib.add('propeller', 'KD-1', PROP).kind).toBe('propeller');
  });

  it('checks a duct against the propeller when they are mounted together', () => {
    const prop = lib.add('propeller', 'twelve inch', { diameter_m: 0.305, pitch_m: 0.114, blades: 2 });
    const rest = { motor: lib.add('motor', 'm', MOTOR).id, esc: lib.add('esc', 'e', { efficiency: 0.95 }).id, supply: lib.add('supply', 's', { cells: 4, internal_resistance_ohm: 0.05 }).id };
    const duct = lib.add('duct', 'KD-1', DUCT);
    // the 256.5 mm bore cannot take a 305 mm propeller: the rig's rule, naming the field and the parts
    expect(() => lib.resolve({ propeller: prop.id, ...rest, duct: duct.id })).toThrow(/^duct\.bore_diameter_m: must be larger than propeller\.diameter_m \(0\.305\) \(duct KD-1 \(#\d+ r1\)\)/);
    expect(() => lib.resolve({ propeller: duct.id, ...rest, duct: null })).toThrow(/propeller: part #\d+ is a duct/);
  });
});

describe('revisions', () => {
  it('an edit adds the next revision; the old one stays as it was, and the database refuses to change it', () => {
    const m = lib.add('motor', 'FM-2609', MOTOR);
    const r2 = lib.edit(m.id, { patch: { resistance_ohm: 0.12, notes: 'rewound' } });
    expect(r2).toMatchObject({ id: m.id, revision: 2, latest: 2, notes: 'rewound' });
    expect(r2.spec.resistance_ohm).toBe(0.12);
    expect(lib.get(m.id, 1).spec.resistance_ohm).toBe(0.115);
    expect(lib.get(m.id, 1).latest).toBe(2);
    // an edit that changes nothing adds nothing
    expect(lib.edit(m.id, { patch: { resistance_ohm: 0.12 } }).revision).toBe(2);
    // an invalid edit is refused whole, naming the field
    expect(() => lib.edit(m.id, { patch: { kv_rpm_per_v: -5 } })).toThrow(/^motor\.kv_rpm_per_v: must be within/);
    expect(lib.get(m.id).revision).toBe(2);
    expect(() => store.db.prepare('UPDATE part_revisions SET notes = ? WHERE part_id = ?').run('quietly', m.id)).toThrow(/never changed/);
    expect(() => store.db.prepare('DELETE FROM part_revisions WHERE part_id = ?').run(m.id)).toThrow(/never deleted/);
  });

  it('a recorded session keeps the revision it ran with after the part is revised', () => {
    const { mount } = lib.importRig(rigFile('quorrel-duct'));
    const sid = store.createSession({ title: 'KD-1 first look', rig: mount.rig, mount: mountedParts(mount.parts) });
    const duct = mount.parts.duct!;
    const r2 = lib.edit(duct.id, { patch: { inlet_lip_radius_m: 0.006 }, name: 'KD-1 sanded lip' });
    expect(r2.revision).toBe(2);
    const s = store.get(sid);
    expect(s.mount.map((m) => [m.slot, m.revision])).toEqual([['propeller', 1], ['motor', 1], ['esc', 1], ['supply', 1], ['duct', 1]]);
    const kept = s.mount.find((m) => m.slot === 'duct')!;
    expect(kept.part_id).toBe(duct.id);
    // revision 1 is what the session ran with, in the library and in its rig snapshot alike
    expect(lib.get(kept.part_id, kept.revision).spec.inlet_lip_radius_m).toBe(0.012);
    expect(s.rig!.duct!.inlet_lip_radius_m).toBe(0.012);
    expect(lib.get(duct.id, 1).used_by).toBe(1);
    expect(lib.get(duct.id, 2).used_by).toBe(0);
    expect(lib.sessionsUsing(duct.id)).toEqual([sid]);
    // deleting the session frees its links, never the revisions
    store.delete(sid);
    expect(lib.get(duct.id, 1).used_by).toBe(0);
  });

  it('a retired part stays for old sessions but can no longer be mounted or edited', () => {
    const { mount } = lib.importRig(rigFile('quorrel-duct'));
    const req = { propeller: mount.parts.propeller.id, motor: mount.parts.motor.id, esc: mount.parts.esc.id, supply: mount.parts.supply.id, duct: mount.parts.duct!.id };
    lib.retire(req.duct);
    expect(lib.list({ kind: 'duct' })).toHaveLength(0);
    expect(lib.list({ kind: 'duct', retired: true })).toHaveLength(1);
    expect(() => lib.resolve(req)).toThrow(/duct: duct quorrel-duct duct \(#\d+ r1\) is retired/);
    expect(() => lib.edit(req.duct, { patch: { mass_kg: 0.08 } })).toThrow(/retired/);
    expect(lib.resolve({ ...req, duct: null }).rig.duct).toBeNull();
    // its name is free again for a new part
    expect(lib.add('duct', 'quorrel-duct duct', DUCT).revision).toBe(1);
  });
});

describe('rig files in and out', () => {
  it('imports both example rigs sharing the propeller, motor, ESC and pack, and gives the rig files back', () => {
    const open = rigFile('quorrel-open');
    const duct = rigFile('quorrel-duct');
    const a = lib.importRig(open);
    expect(a.created.map((p) => p.kind)).toEqual(['propeller', 'motor', 'esc', 'supply']);
    const b = lib.importRig(duct);
    // the same propeller, motor, ESC and pack are the same parts; only the duct is new
    expect(b.reused.map((p) => p.kind)).toEqual(['propeller', 'motor', 'esc', 'supply']);
    expect(b.created.map((p) => p.kind)).toEqual(['duct']);
    expect(lib.list()).toHaveLength(5);
    for (const [file, got] of [[open, a.mount.rig], [duct, b.mount.rig]] as const) {
      const { name: _n, description: _d, ...want } = file;
      const { name: _n2, ...have } = got;
      expect(have).toEqual(want);
    }
    // KD-1: exit 266.4 mm on a 254 mm propeller, sigma = (266.4 / 254)^2 = 1.100; tip gap (256.5 - 254) / 2 =
    // 1.25 mm, 0.98 % of the radius, "near 1 % of the radius or less is tight" (common practice)
    const g = rigGeometry(b.mount.rig);
    expect(g.sigma).toBeCloseTo(1.1, 3);
    expect(g.tipClearance_mm).toBeCloseTo(1.25, 9);
    expect(g.tipClearance_pctRadius).toBeCloseTo(0.984, 3);
    // importing the same file again creates nothing
    expect(lib.importRig(duct).created).toHaveLength(0);
  });

  it('a changed rig file under the same name revises its parts instead of duplicating them', () => {
    const duct = rigFile('quorrel-duct');
    const first = lib.importRig(duct).mount.parts.duct!;
    const again = lib.importRig({ ...duct, duct: { ...duct.duct!, mass_kg: 0.07 } });
    expect(again.revised.map((p) => [p.id, p.revision])).toEqual([[first.id, 2]]);
    expect(again.mount.parts.duct!.revision).toBe(2);
  });
});

describe('store migration', () => {
  it('brings a v3 file to the current version with the parts tables, sessions kept', () => {
    store.close();
    const file = join(dir, 'old', 'sessions.sqlite');
    mkdirSync(join(dir, 'old'), { recursive: true });
    const db = new Database(file);
    migrate(db, 3);
    db.prepare("INSERT INTO sessions (title, outcome, started_at) VALUES ('before parts', 'completed', 1)").run();
    expect(schemaVersion(db)).toBe(3);
    db.close();
    store = SessionStore.open(join(dir, 'old'));
    expect(schemaVersion(store.db)).toBe(SCHEMA_VERSION);
    expect(store.get(1).mount).toEqual([]);
    lib = new PartsLibrary(store.db);
    expect(lib.add('esc', 'bench ESC', { efficiency: 0.95 }).id).toBe(1);
  });
});

describe('limits of a mount', () => {
  it('declares a direction for every limit', () => {
    expect(Object.keys(STRICTER).sort()).toEqual([...LIMIT_KEYS].sort());
  });

  it('puts the stricter of two in force, and refuses two parts that disagree on a limit with no direction', () => {
    const c = combineLimits(
      [
        { from: 'motor A', limits: { max_temp_c: 80, max_current_a: 30 } },
        { from: 'supply B', limits: { min_cell_v: 3.5, max_current_a: 25 } },
      ],
      { max_current_a: 35, min_cell_v: 3.3 },
    );
    expect(c.limits).toEqual({ max_temp_c: 80, max_current_a: 25, min_cell_v: 3.5 });
    expect(c.source).toEqual({ max_temp_c: 'motor A', max_current_a: 'supply B', min_cell_v: 'supply B' });
    expect(() => combineLimits([{ from: 'a', limits: { cells: 4 } }, { from: 'b', limits: { cells: 6 } }], {})).toThrow(LimitConflict);
    // the bench settles a limit with no direction
    expect(combineLimits([{ from: 'a', limits: { cells: 4 } }], { cells: 6 }).limits.cells).toBe(6);
  });

  it('a mount service puts a part\'s own limits in force and refuses to mount when told the bench may turn', () => {
    let why: string | null = null;
    const svc = new MountService({ library: lib, benchLimits: { max_current_a: 35 }, refusal: () => why });
    svc.setInitial(rigFile('quorrel-open'), 'rig file');
    expect(svc.state.limits.max_current_a).toBe(35);
    const hot = lib.add('motor', 'FM-2609 hot', { ...MOTOR, limits: { max_temp_c: 70, max_current_a: 20 } });
    const p = svc.state.parts!;
    const req = { propeller: p.propeller.id, motor: hot.id, esc: p.esc.id, supply: p.supply.id, duct: null };
    why = 'the bench is armed: disarm first';
    expect(() => svc.mount(req)).toThrow(/^mounting refused: the bench is armed/);
    expect(svc.state.parts!.motor.id).toBe(p.motor.id);
    why = null;
    const st = svc.mount(req);
    expect(st.limits.max_temp_c).toBe(70);
    expect(st.limits.max_current_a).toBe(20);
    expect(st.limitSource.max_current_a).toMatch(/^motor FM-2609 hot/);
    expect(svc.sessionParts().find((m) => m.slot === 'motor')).toMatchObject({ part_id: hot.id, revision: 1 });
  });
});
