// `ductbench parts`: the example rig files go in and come back out equal, a duct added by hand, revised (the
// old revision kept), retired; bad documents are refused with the field named and exit status 2; a session's
// rig is exported from the revisions it ran with.

import { readFileSync } from 'node:fs';
import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { partsMain } from '../server/cli/parts.js';
import { sessionsMain } from '../server/cli/sessions.js';
import { parseRig } from '../server/model/rig.js';
import { mountedParts, PartsLibrary } from '../server/parts/library.js';
import { SessionStore } from '../server/store/store.js';

const RIGS = new URL('../examples/rigs/', import.meta.url);
let dir: string;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-parts-cli-'));
});
afterAll(async () => {
  await rm(dir, { recursive: true, force: true });
});

async function parts(...argv: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const code = await partsMain([...argv, '--data-dir', dir], { stdout: (s) => void (out += s), stderr: (s) => void (err += s) });
  return { code, out, err };
}

describe('ductbench parts', () => {
  it('imports the example rigs and exports them back equal', async () => {
    const a = await parts('import', new URL('quorrel-open.json', RIGS).pathname, '--json');
    expect(a.code, a.err).toBe(0);
    const b = await parts('import', new URL('quorrel-duct.json', RIGS).pathname, '--json');
    const got = JSON.parse(b.out) as { created: { id: number; kind: string }[]; reused: { id: number; kind: string }[] };
    expect(got.created.map((p) => p.kind)).toEqual(['duct']);
    const id = (k: string) => String([...got.reused, ...got.created].find((p) => p.kind === k)!.id);
    const e = await parts('export', '--propeller', id('propeller'), '--motor', id('motor'), '--esc', id('esc'), '--supply', id('supply'), '--duct', id('duct'), '--name', 'quorrel-duct');
    expect(e.code, e.err).toBe(0);
    const { description: _d, ...want } = parseRig(JSON.parse(readFileSync(new URL('quorrel-duct.json', RIGS), 'utf8')));
    expect(parseRig(JSON.parse(e.out))).toEqual(want);
    const open = await parts('export', '--propeller', id('propeller'), '--motor', id('motor'), '--esc', id('esc'), '--supply', id('supply'), '--duct', 'none');
    expect(JSON.parse(open.out).duct).toBeNull();
    const list = await parts('list');
    expect(list.out.split('\n').filter((l) => /^\d/.test(l))).toHaveLength(5);
  });

  it('adds, revises and retires a duct; refuses bad documents naming the field', async () => {
    const doc = join(dir, 'kd2.json');
    await writeFile(doc, JSON.stringify({ bore_diameter_m: 0.2562, inlet_lip_radius_m: 0.015, exit_diameter_m: 0.27, length_m: 0.1, mass_kg: 0.09 }));
    const add = await parts('add', 'duct', '--name', 'KD-2', '--file', doc, '--notes', 'longer diffuser');
    expect(add.code, add.err).toBe(0);
    const id = /#(\d+) r1/.exec(add.out)![1];
    const bad = await parts('add', 'duct', '--name', 'KD-3', '--json', '{"bore_diameter_m":0.2562,"inlet_lip_radius_m":0.015,"exit_diameter_m":0.27,"length_m":0.1}');
    expect(bad).toMatchObject({ code: 2, err: 'ductbench parts add: duct.mass_kg: is required\n' });
    const kind = await parts('add', 'rotor', '--name', 'x', '--json', '{}');
    expect(kind.code).toBe(2);
    expect(kind.err).toMatch(/kind: must be one of propeller, motor, esc, supply, duct/);
    const edit = await parts('edit', id, '--json', '{"inlet_lip_radius_m":0.018}');
    expect(edit.out).toMatch(/^duct KD-2 \(#\d+ r2\): new revision \(sessions on r1 keep it\)/);
    const show = JSON.parse((await parts('show', `${id}@1`, '--json')).out) as { revision: number; latest: number; spec: { inlet_lip_radius_m: number }; notes: string };
    expect(show).toMatchObject({ revision: 1, latest: 2, spec: { inlet_lip_radius_m: 0.015 }, notes: 'longer diffuser' });
    expect((await parts('retire', id)).code).toBe(0);
    expect((await parts('edit', id, '--notes', 'x')).code).toBe(1);
    expect((await parts('list', '--kind', 'duct')).out).not.toMatch(/KD-2/);
    expect((await parts('list', '--kind', 'duct', '--retired')).out).toMatch(/KD-2 \(retired\)/);
    expect((await parts('show', '999')).code).toBe(1);
  });

  it("exports the rig a session ran with, from the revisions it recorded, after the parts were revised", async () => {
    const store = SessionStore.open(dir);
    let sid: number;
    let motor: number;
    try {
      const lib = new PartsLibrary(store.db);
      const { mount } = lib.importRig(parseRig(JSON.parse(readFileSync(new URL('quorrel-duct.json', RIGS), 'utf8'))));
      sid = store.createSession({ title: 'before rewind', rig: mount.rig, mount: mountedParts(mount.parts) });
      motor = mount.parts.motor.id;
    } finally {
      store.close();
    }
    expect((await parts('edit', String(motor), '--json', '{"resistance_ohm":0.2}')).code).toBe(0);
    const e = await parts('export', '--session', String(sid));
    expect(e.code, e.err).toBe(0);
    expect(JSON.parse(e.out).motor.resistance_ohm).toBe(0.115);
    // the sessions that ran with a part, and with one revision of it
    const list = async (ref: string) => {
      let out = '';
      expect(await sessionsMain(['list', '--part', ref, '--json', '--data-dir', dir], { stdout: (x) => void (out += x), stderr: () => {} })).toBe(0);
      return (JSON.parse(out) as { id: number }[]).map((r) => r.id);
    };
    expect(await list(`${motor}`)).toEqual([sid]);
    expect(await list(`${motor}@1`)).toEqual([sid]);
    expect(await list(`${motor}@2`)).toEqual([]);
    let shown = '';
    await sessionsMain(['show', String(sid), '--data-dir', dir], { stdout: (x) => void (shown += x), stderr: () => {} });
    expect(shown).toMatch(new RegExp(`parts +propeller .*motor [^,]+ \\(#${motor} r1\\)`));
    // a JSON export names the parts; imported elsewhere it keeps the rig snapshot and links no parts
    let exported = '';
    await sessionsMain(['export', String(sid), '--format', 'json', '--data-dir', dir], { stdout: (x) => void (exported += x), stderr: () => {} });
    const session = (JSON.parse(exported) as { session: { mount: { slot: string; part_id: number; revision: number }[] } }).session;
    expect(session.mount.find((m) => m.slot === 'motor')).toMatchObject({ part_id: motor, revision: 1 });
    const file = join(dir, 'export.json');
    await writeFile(file, exported);
    let imported = '';
    expect(await sessionsMain(['import', file, '--json', '--data-dir', dir], { stdout: (x) => void (imported += x), stderr: () => {} })).toBe(0);
    const again = SessionStore.open(dir);
    try {
      const copy = again.get((JSON.parse(imported) as { id: number }).id);
      expect(copy.mount).toEqual([]);
      expect(copy.rig!.motor.resistance_ohm).toBe(0.115);
    } finally {
      again.close();
    }
  });
});
