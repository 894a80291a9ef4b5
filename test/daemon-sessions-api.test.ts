// The sessions HTTP API of the daemon: token required, filters, one session, decimated samples, edits with
// schema errors named, delete, comparison with the vehicle verdict, the HTML reports and the exports. The store
// is filled beforehand with momentum-theory sessions (server/compare/synthetic.ts: an invented open rotor and
// an invented duct), so the comparison's numbers are known: at equal thrust an ideal duct of exit-area ratio
// sigma needs 1/sqrt(2 sigma) of the open rotor's power (momentum theory; McCormick 1967, Pereira 2008, see
// CHECKS.md), a 29.3 % saving at sigma = 1.

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { idealSession } from '../server/compare/synthetic.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { SessionStore } from '../server/store/store.js';
import type { Sample } from '../server/bench/telemetry.js';

let d: RunningDaemon;
let dir: string;
const ids: Record<'open' | 'duct' | 'other', number> = { open: 0, duct: 0, other: 0 };
const DAY = 86_400_000;
const T0 = Date.UTC(2026, 2, 10, 9, 0, 0);

function samples(t0: number, n: number): Sample[] {
  return Array.from({ length: n }, (_, i) => ({
    t: t0 + i * 10,
    dt: i * 0.01,
    thrust: 2 + Math.sin(i / 50),
    voltage: 14.8,
    current: 5,
    power: 74,
    rpm: null,
    temp: null,
    torque: null,
    out: 0.4,
  }));
}

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-api-'));
  const store = SessionStore.open(dir);
  const thrusts = [1, 2, 3, 4, 5, 6];
  const open = idealSession({ id: 0, title: 'open baseline', sigma: null, thrusts, relStd: 0.01 });
  const duct = idealSession({ id: 0, title: 'duct sigma 1', sigma: 1, thrusts, relStd: 0.01, duct_mass_kg: 0.05 });
  const mk = (title: string, s: ReturnType<typeof idealSession>, tags: string[], t0: number, outcome: 'completed' | 'aborted') => {
    const id = store.createSession({ title, tags, rig: s.rig, started_at: t0 });
    store.writeBatch(id, samples(t0, 3000), s.points);
    store.setOutcome(id, outcome, t0 + 60_000);
    return id;
  };
  ids.open = mk('open baseline', open, ['baseline', 'fenmoor'], T0, 'completed');
  ids.duct = mk('duct sigma 1', duct, ['duct', 'fenmoor'], T0 + DAY, 'completed');
  ids.other = mk('short look', open, ['scratch'], T0 + 2 * DAY, 'aborted');
  store.close();
  d = await startDaemon({ source: { kind: 'sim', seed: 5 }, httpPort: 0, dataDir: dir, token: 'api-token-77', log: () => {} });
  await d.firstConnect;
});
afterAll(async () => {
  await d?.close();
  await rm(dir, { recursive: true, force: true });
});

const base = () => `http://127.0.0.1:${d.port}`;
const auth = { authorization: 'Bearer api-token-77' };

async function api(path: string, init: RequestInit = {}): Promise<{ status: number; body: any; text: string; headers: Headers }> {
  const res = await fetch(base() + path, { ...init, headers: { ...auth, ...(init.headers ?? {}) } });
  const text = await res.text();
  let body: unknown = null;
  try {
    body = JSON.parse(text);
  } catch {
    body = null;
  }
  return { status: res.status, body, text, headers: res.headers };
}

describe('sessions HTTP API', () => {
  it('needs the token on every endpoint', async () => {
    for (const p of ['/api/sessions', `/api/sessions/${ids.open}`, `/api/sessions/${ids.open}/samples`, `/api/compare?ids=${ids.open},${ids.duct}`, `/api/sessions/${ids.open}/report`]) {
      expect((await fetch(base() + p)).status, p).toBe(401);
      expect((await fetch(base() + p, { headers: { authorization: 'Bearer wrong' } })).status, p).toBe(401);
    }
    expect((await fetch(`${base()}/api/sessions/${ids.open}`, { method: 'DELETE' })).status).toBe(401);
    // the session is still there
    expect((await api(`/api/sessions/${ids.open}`)).status).toBe(200);
  });

  it('lists with tag, text, rig, outcome and date filters; refuses unknown parameters and bad values', async () => {
    const titles = async (q: string) => ((await api(`/api/sessions${q}`)).body.sessions as { title: string }[]).map((s) => s.title);
    expect(await titles('')).toEqual(['short look', 'duct sigma 1', 'open baseline']);
    expect(await titles('?tag=fenmoor')).toEqual(['duct sigma 1', 'open baseline']);
    expect(await titles('?tag=fenmoor&tag=duct')).toEqual(['duct sigma 1']);
    expect(await titles('?text=BASE')).toEqual(['open baseline']);
    expect(await titles('?outcome=aborted')).toEqual(['short look']);
    expect(await titles('?outcome=completed,aborted')).toHaveLength(3);
    expect(await titles('?from=2026-03-11&to=2026-03-11')).toEqual(['duct sigma 1']);
    const rig = (await api(`/api/sessions/${ids.duct}`)).body.session.rig_name as string;
    expect(await titles(`?rig=${encodeURIComponent(rig)}`)).toEqual(['duct sigma 1']);
    for (const [q, field] of [
      ['?colour=red', 'colour'],
      ['?outcome=exploded', 'outcome'],
      ['?from=yesterday', 'from'],
      ['?limit=0', 'limit'],
    ] as const) {
      const r = await api(`/api/sessions${q}`);
      expect(r.status, q).toBe(400);
      expect(r.body.field, q).toBe(field);
    }
  });

  it('returns one session with points and events; 404 for a missing one, 400 for a malformed id', async () => {
    const r = await api(`/api/sessions/${ids.duct}`);
    expect(r.status).toBe(200);
    expect(r.body.session).toMatchObject({ id: ids.duct, title: 'duct sigma 1', outcome: 'completed' });
    expect(r.body.session.points).toHaveLength(6);
    expect((await api('/api/sessions/999999')).status).toBe(404);
    expect((await api('/api/sessions/999999/samples')).status).toBe(404);
    expect((await api('/api/sessions/999999/report')).status).toBe(404);
    expect((await api('/api/sessions/abc')).status).toBe(400);
    expect((await api('/api/sessions/0')).status).toBe(400);
    expect((await api('/api/sessions/%E0%A4%A')).status).toBe(400);
    expect((await api('/api/sessions/1/nothing')).status).toBe(404);
  });

  it('thins samples to the points asked for', async () => {
    const r = await api(`/api/sessions/${ids.open}/samples?points=100`);
    expect(r.status).toBe(200);
    const n = r.body.samples.t.length as number;
    expect(n).toBeGreaterThan(10);
    expect(n).toBeLessThanOrEqual(100);
    expect(r.body.samples.thrust).toHaveLength(n);
    // the stored 3000 come back whole when more are asked for
    expect((await api(`/api/sessions/${ids.open}/samples?points=5000`)).body.samples.t).toHaveLength(3000);
    expect((await api(`/api/sessions/${ids.open}/samples?points=1`)).status).toBe(400);
    expect((await api(`/api/sessions/${ids.open}/samples?points=lots`)).body.field).toBe('points');
  });

  it('edits title, notes and tags; refuses unknown keys, wrong types, non-JSON and foreign origins', async () => {
    const patch = (body: unknown, headers: Record<string, string> = {}) =>
      api(`/api/sessions/${ids.other}`, { method: 'PATCH', body: typeof body === 'string' ? body : JSON.stringify(body), headers: { 'content-type': 'application/json', ...headers } });
    const ok = await patch({ title: 'short look, renamed', notes: 'lip chipped', tags: ['scratch', 'lip-damage'] });
    expect(ok.status).toBe(200);
    expect(ok.body.session).toMatchObject({ title: 'short look, renamed', notes: 'lip chipped' });
    expect([...ok.body.session.tags].sort()).toEqual(['lip-damage', 'scratch']);
    const again = await patch({ tags: ['lip-damage'] });
    expect(again.body.session.tags).toEqual(['lip-damage']);
    expect((await patch({ addTags: ['retest'] })).body.session.tags.sort()).toEqual(['lip-damage', 'retest']);

    expect(await patch({ colour: 'red' })).toMatchObject({ status: 400, body: { field: 'colour' } });
    expect(await patch({ title: 42 })).toMatchObject({ status: 400, body: { field: 'title' } });
    expect(await patch({ tags: 'one' })).toMatchObject({ status: 400, body: { field: 'tags' } });
    expect(await patch({ tags: ['a'], addTags: ['b'] })).toMatchObject({ status: 400 });
    expect((await patch('{not json')).status).toBe(400);
    expect((await patch([1, 2])).status).toBe(400);
    expect((await api(`/api/sessions/${ids.other}`, { method: 'PATCH', body: '{"title":"x"}', headers: { 'content-type': 'text/plain' } })).status).toBe(400);
    expect((await patch({ title: 'from elsewhere' }, { origin: 'http://evil.example' })).status).toBe(403);
    expect((await api('/api/sessions/999999', { method: 'PATCH', body: '{"title":"x"}', headers: { 'content-type': 'application/json' } })).status).toBe(404);
    expect((await api(`/api/sessions/${ids.other}`)).body.session.title).toBe('short look, renamed');
  });

  it('compares against a baseline with the vehicle verdict; refuses bad ids and half a vehicle', async () => {
    const r = await api(`/api/compare?ids=${ids.open},${ids.duct}&mass=1.2&motors=4&battery_wh=50`);
    expect(r.status).toBe(200);
    const c = r.body.comparison;
    expect(c.baseline).toBe(ids.open);
    expect(c.rows.length).toBeGreaterThan(3);
    for (const row of c.rows) {
      // momentum theory, ideal duct sigma = 1 against the open rotor: 1 - 1/sqrt(2) = 29.3 % (CHECKS.md)
      expect(row.ideal_saving_pct).toBeCloseTo(29.29, 1);
      expect(row.power_saving_pct).toBeCloseTo(29.29, 0);
    }
    expect(c.verdict.text.length).toBeGreaterThan(0);
    expect(c.verdict.vehicle).toEqual({ mass_kg: 1.2, motors: 4, battery_wh: 50 });
    expect((await api(`/api/compare?ids=${ids.open},${ids.duct}`)).body.comparison.verdict).toBeNull();
    expect(await api(`/api/compare?ids=${ids.open}`)).toMatchObject({ status: 400, body: { field: 'ids' } });
    expect(await api(`/api/compare?ids=${ids.open},${ids.open}`)).toMatchObject({ status: 400 });
    expect(await api('/api/compare')).toMatchObject({ status: 400, body: { field: 'ids' } });
    expect(await api(`/api/compare?ids=${ids.open},${ids.duct}&mass=1.2`)).toMatchObject({ status: 400, body: { field: 'motors' } });
    expect(await api(`/api/compare?ids=${ids.open},${ids.duct}&mass=-1&motors=4&battery_wh=50`)).toMatchObject({ status: 400, body: { field: 'mass' } });
    expect((await api(`/api/compare?ids=${ids.open},999999`)).status).toBe(404);
  });

  it('serves the HTML reports and the exports as attachments', async () => {
    const rep = await api(`/api/sessions/${ids.duct}/report`);
    expect(rep.status).toBe(200);
    expect(rep.headers.get('content-type')).toMatch(/text\/html/);
    expect(rep.headers.get('content-disposition')).toMatch(/attachment; filename="ductbench-session-\d+\.html"/);
    expect(rep.text).toContain('duct sigma 1');
    expect(rep.text).toContain('<svg');
    const crep = await api(`/api/compare/report?ids=${ids.open},${ids.duct}`);
    expect(crep.status).toBe(200);
    expect(crep.text).toMatch(/<html/);
    const csv = await api(`/api/sessions/${ids.open}/export?format=csv`);
    expect(csv.headers.get('content-type')).toMatch(/text\/csv/);
    expect(csv.text.split('\n').filter((l) => /^\d/.test(l)).length).toBe(3000);
    const pts = await api(`/api/sessions/${ids.open}/export?format=csv&what=points`);
    expect(pts.status).toBe(200);
    const json = await api(`/api/sessions/${ids.open}/export?format=json`);
    expect(json.body.format).toBe('ductbench-session');
    expect((await api(`/api/sessions/${ids.open}/export?format=xml`)).body.field).toBe('format');
    expect((await api('/api/sessions/999999/export?format=csv')).status).toBe(404);
  });

  it('deletes a session once; the deleted one is then 404', async () => {
    const del = await api(`/api/sessions/${ids.other}`, { method: 'DELETE' });
    expect(del).toMatchObject({ status: 200, body: { deleted: ids.other } });
    expect((await api(`/api/sessions/${ids.other}`)).status).toBe(404);
    expect((await api(`/api/sessions/${ids.other}`, { method: 'DELETE' })).status).toBe(404);
    expect((await api('/api/sessions')).body.sessions).toHaveLength(2);
  });
});
