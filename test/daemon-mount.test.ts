// Mounting from the dashboard, against the daemon on the in-process virtual bench with a data folder: the
// first mount is the virtual bench's rig, put into the library; the controlling dashboard creates a duct on
// the spot and mounts it; every connected dashboard gets the new prediction and limits at once; a viewer
// cannot change the mount; mounting while armed is refused with the reason; the next run records the mount
// with its revisions, and keeps them after the part is revised.

import { readFileSync } from 'node:fs';
import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHECKLIST_IDS, type MountView, type PartView, type ServerMessage } from '../server/api/messages.js';
import { startDaemon, type LivePrediction, type RunningDaemon } from '../server/daemon.js';
import { parseRig } from '../server/model/rig.js';
import { PartsLibrary } from '../server/parts/library.js';
import { SessionStore } from '../server/store/store.js';
import { TestClient } from './helpers/ws-client.js';

let d: RunningDaemon;
let dir: string;
let ctl: TestClient;
let viewer: TestClient;

// KD-1 style duct for the 254 mm propeller of the virtual bench: exit 266.4 mm gives sigma = (266.4 / 254)^2
// (its mounting rated to 12 N: a limit of its own, invented)
const KD1 = { bore_diameter_m: 0.2565, inlet_lip_radius_m: 0.012, exit_diameter_m: 0.2664, length_m: 0.09, mass_kg: 0.085, notes: 'printed, first lip', limits: { max_thrust_n: 12 } };

type Reply = Extract<ServerMessage, { type: 'reply' }>;
async function request(c: TestClient, msg: Record<string, unknown>): Promise<Reply & { data?: unknown }> {
  const id = 1000 + c.messages.length + Math.floor(Math.random() * 1e6);
  c.ws.send(JSON.stringify({ ...msg, id }));
  let r: Reply | undefined;
  await c.until(() => (r = c.messages.find((m): m is Reply => m.type === 'reply' && m.id === id)) !== undefined, 20_000, `reply to ${String(msg.type)}`);
  return r!;
}

/** The client's current extras: the snapshot's, updated by every extras message since. */
function extras(c: TestClient): Record<string, unknown> {
  let e: Record<string, unknown> = {};
  for (const m of c.messages) {
    if (m.type === 'snapshot') e = { ...m.extras };
    else if (m.type === 'extras') e = { ...e, ...m.extras };
  }
  return e;
}
const mountOf = (c: TestClient) => extras(c).mount as MountView;
const predictionOf = (c: TestClient) => extras(c).prediction as LivePrediction | null;

let open: MountView;
beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-mount-'));
  d = await startDaemon({ source: { kind: 'sim', seed: 21 }, httpPort: 0, dataDir: dir, log: () => {} });
  await d.firstConnect;
  ctl = await TestClient.connect(d.port, d.token);
  viewer = await TestClient.connect(d.port, d.token);
  await ctl.until(() => predictionOf(ctl) !== null, 10_000, 'first prediction');
  open = mountOf(ctl);
});
afterAll(async () => {
  ctl?.close();
  viewer?.close();
  await d?.close();
  await rm(dir, { recursive: true, force: true });
});

describe('the mount from the dashboard', () => {
  it('starts on the virtual bench rig, its parts in the library', () => {
    expect(open.source).toBe('virtual bench');
    expect(open.ducted).toBe(false);
    expect(open.slots.map((s) => [s.slot, s.revision])).toEqual([['propeller', 1], ['motor', 1], ['esc', 1], ['supply', 1], ['duct', null]]);
    expect((extras(ctl).parts as PartView[]).map((p) => p.kind).sort()).toEqual(['esc', 'motor', 'propeller', 'supply']);
    expect(mountOf(viewer)).toEqual(open);
  });

  it('a viewer sees the mount but can change nothing', async () => {
    const r = await request(viewer, { type: 'part_create', kind: 'duct', name: 'viewer duct', document: KD1 });
    expect(r).toMatchObject({ ok: false, error: expect.stringMatching(/viewer/) });
    const ids = Object.fromEntries(open.slots.map((s) => [s.slot, s.part_id]));
    const m = await request(viewer, { type: 'mount', parts: ids });
    expect(m).toMatchObject({ ok: false, error: expect.stringMatching(/viewer/) });
  });

  it('refuses a part with a bad field, naming it, and a mount message of the wrong shape', async () => {
    const r = await request(ctl, { type: 'part_create', kind: 'duct', name: 'KD-1', document: { ...KD1, inlet_lip_radius_m: 0.3 } });
    expect(r).toMatchObject({ ok: false, error: expect.stringMatching(/^duct\.inlet_lip_radius_m: must not exceed half the bore/) });
    const m = await request(ctl, { type: 'mount', parts: { propeller: 1, motor: 2, esc: 3, supply: 4 } });
    expect(m).toMatchObject({ ok: false, error: 'mount.parts.duct must be a part id or null (open propeller)' });
  });

  let ductId = 0;
  it('refuses to mount while armed, with the reason, and leaves the mount as it was', async () => {
    const created = await request(ctl, { type: 'part_create', kind: 'duct', name: 'KD-1', document: KD1 });
    expect(created.ok, JSON.stringify(created)).toBe(true);
    ductId = (created.data as { id: number }).id;
    await viewer.until(() => (extras(viewer).parts as PartView[]).some((p) => p.id === ductId), 5000, 'the new part at the viewer');
    expect((await ctl.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).ok).toBe(true);
    expect((await ctl.command({ type: 'arm' })).ok).toBe(true);
    await ctl.until(() => mountOf(ctl).can_mount === false, 5000, 'mount closed while armed');
    const ids = Object.fromEntries(open.slots.map((s) => [s.slot, s.part_id]));
    const r = await request(ctl, { type: 'mount', parts: { ...ids, duct: ductId } });
    expect(r).toMatchObject({ ok: false, error: expect.stringMatching(/^mounting refused: the bench is armed: disarm first/) });
    expect(mountOf(ctl).ducted).toBe(false);
    expect(d.mounts.state.rig!.duct).toBeNull();
    expect(d.sim!.rig.duct).toBeNull();
    expect((await ctl.command({ type: 'disarm' })).ok).toBe(true);
    await ctl.until(() => mountOf(ctl).can_mount === true, 5000, 'mount open again');
  });

  it('mounts the duct: every dashboard gets the ducted prediction and the virtual bench carries it', async () => {
    const before = predictionOf(viewer)!;
    expect(before.sigma).toBeNull();
    const ids = Object.fromEntries(open.slots.map((s) => [s.slot, s.part_id]));
    const r = await request(ctl, { type: 'mount', parts: { ...ids, duct: ductId }, name: 'Millrace with KD-1' });
    expect(r.ok, JSON.stringify(r)).toBe(true);
    for (const c of [ctl, viewer]) {
      await c.until(() => mountOf(c).ducted && predictionOf(c)?.sigma !== null, 5000, 'ducted prediction');
      const p = predictionOf(c)!;
      expect(p.rig).toBe('Millrace with KD-1');
      expect(p.sigma).toBeCloseTo((0.2664 / 0.254) ** 2, 9);
      expect(p.tip_clearance_mm).toBeCloseTo(1.25, 9);
      // Momentum theory: at equal thrust a duct of exit-area ratio sigma needs 1/sqrt(2 sigma) of the open
      // rotor's ideal power, so the ideal grams per watt stand in the ratio sqrt(2 sigma) (McCormick 1967,
      // Pereira 2008; CHECKS.md)
      for (let i = 5; i < p.throttle.length; i += 6) expect(p.ideal_ducted_gpw[i]! / p.ideal_open_gpw[i]).toBeCloseTo(Math.sqrt(2 * p.sigma!), 6);
      // the ducted rig is heavier and the model's curve changed
      expect(p.grams_per_watt).not.toEqual(before.grams_per_watt);
      expect(mountOf(c).slots.find((s) => s.slot === 'duct')).toMatchObject({ part_id: ductId, revision: 1, name: 'KD-1' });
    }
    expect(d.sim!.rig.duct).toMatchObject({ bore_diameter_m: 0.2565, exit_diameter_m: 0.2664 });
    // the limits in force follow: the duct's own thrust limit, at the interlocks and at every dashboard
    expect(d.interlocks.limits.max_thrust_n).toBe(12);
    for (const c of [ctl, viewer]) expect((extras(c).limits as { max_thrust_n: number }).max_thrust_n).toBe(12);
    expect(open.slots).toHaveLength(5);
    expect(ctl.messages.some((m) => m.type === 'event' && m.event.kind === 'mount' && /duct KD-1 r1/.test(m.event.text))).toBe(true);
    // new hardware on the stand: the pre-arm checklist is asked for again before the next arm
    for (const c of [ctl, viewer]) expect(extras(c).checklist).toMatchObject({ confirmed: false });
    expect((await ctl.command({ type: 'arm' })).error).toMatch(/checklist/);
    expect((await ctl.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).ok).toBe(true);
  });

  it('the next run records the mount with its revisions, and keeps them after the duct is revised', async () => {
    const r = await request(ctl, { type: 'sequence_start', source: { kind: 'staircase', start: 0.3, stop: 0.4, step: 0.1, hold_s: 1, window_s: 0.5, ramp_s: 0.5 }, title: 'KD-1 look' });
    expect(r.ok, JSON.stringify(r)).toBe(true);
    const run = (r.data as { run: number; session: number | null });
    await ctl.until(() => ctl.messages.some((m) => m.type === 'run' && m.run.run === run.run && m.run.outcome !== null), 60_000, 'run finished');
    const sid = run.session!;
    expect(sid).toBeGreaterThan(0);
    const res = await fetch(`http://127.0.0.1:${d.port}/api/sessions/${sid}?token=${d.token}`);
    const s = ((await res.json()) as { session: unknown }).session as { mount: { slot: string; part_id: number; revision: number; name: string }[]; rig: { duct: unknown; name: string } };
    expect(s.mount.map((m) => [m.slot, m.part_id, m.revision])).toEqual([...open.slots.filter((x) => x.part_id !== null).map((x) => [x.slot, x.part_id, 1]), ['duct', ductId, 1]]);
    expect(s.rig.name).toBe('Millrace with KD-1');
    expect(s.rig.duct).toMatchObject({ inlet_lip_radius_m: 0.012 });
    // the sessions a part revision ran in, and the part's record, over HTTP
    const api = (path: string) => fetch(`http://127.0.0.1:${d.port}${path}${path.includes('?') ? '&' : '?'}token=${d.token}`).then(async (r) => ({ status: r.status, body: (await r.json()) as Record<string, unknown> }));
    const byPart = await api(`/api/sessions?part=${ductId}@1`);
    expect((byPart.body.sessions as { id: number }[]).map((x) => x.id)).toEqual([sid]);
    expect((await api(`/api/sessions?part=${ductId}@2`)).body.sessions).toEqual([]);
    expect(await api('/api/sessions?part=KD-1')).toMatchObject({ status: 400, body: { field: 'part' } });
    const part = await api(`/api/parts/${ductId}`);
    expect(part.body).toMatchObject({ sessions: [sid], revisions: [{ revision: 1, name: 'KD-1', used_by: 1 }] });
    expect((await api('/api/parts?kind=duct')).body.parts).toHaveLength(1);
    expect((await api('/api/parts/9999')).status).toBe(404);
    // revise the duct through the library (as `ductbench parts edit` does, alongside the daemon)
    const store = SessionStore.open(dir, { recover: false });
    try {
      expect(new PartsLibrary(store.db).edit(ductId, { patch: { inlet_lip_radius_m: 0.02 } }).revision).toBe(2);
      // the mount in force is still revision 1; the view says a newer one is in the library
      expect(d.mounts.view().slots.find((x) => x.slot === 'duct')).toMatchObject({ revision: 1, latest: 2 });
      const again = store.get(sid);
      expect(again.mount.find((m) => m.slot === 'duct')).toMatchObject({ part_id: ductId, revision: 1 });
      expect(again.rig!.duct!.inlet_lip_radius_m).toBe(0.012);
    } finally {
      store.close();
    }
  });
});

describe('serve --rig sets the first mount', () => {
  it('puts the rig file\'s parts into the library, and finds them again on the next start instead of duplicating them', async () => {
    const rig = parseRig(JSON.parse(readFileSync(new URL('../examples/rigs/quorrel-duct.json', import.meta.url), 'utf8')));
    const ids: number[][] = [];
    for (let i = 0; i < 2; i++) {
      const dd = await startDaemon({ source: { kind: 'sim', seed: 4 }, rig, httpPort: 0, dataDir: dir, log: () => {} });
      try {
        await dd.firstConnect;
        const v = dd.mounts.view();
        expect(v).toMatchObject({ source: 'rig file', rig: 'quorrel-duct', ducted: true });
        ids.push(v.slots.map((x) => x.part_id!));
        expect(dd.mounts.state.rig!.duct).toEqual(rig.duct);
      } finally {
        await dd.close();
      }
    }
    expect(ids[1]).toEqual(ids[0]);
  });
});
