// `ductbench sessions` and `ductbench compare` end to end on a store in a temporary folder.

import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, expect, it } from 'vitest';
import { compareMain } from '../server/cli/compare.js';
import { sessionsMain } from '../server/cli/sessions.js';
import { grid } from '../server/compare/curve.js';
import { idealSession } from '../server/compare/synthetic.js';
import { SessionStore } from '../server/store/store.js';

let dir: string;
let out: string[];
let err: string[];
const io = { stdout: (s: string) => void out.push(s), stderr: (s: string) => void err.push(s) };
const run = async (fn: typeof sessionsMain, argv: string[]) => {
  out = [];
  err = [];
  const code = await fn(argv, io);
  return { code, stdout: out.join(''), stderr: err.join('') };
};
let open: number;
let ducted: number;

beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'ductbench-cli-'));
  const store = SessionStore.open(dir);
  const thrusts = grid(Math.sqrt(0.5), Math.sqrt(10), 30).map((x) => x * x);
  for (const [sigma, tags, mass] of [[null, ['open'], 0], [1, ['ducted'], 0.3]] as const) {
    const s = idealSession({ id: 0, sigma, thrusts, duct_mass_kg: mass });
    const rec = store.record({ title: s.title, tags: [...tags], rig: s.rig });
    rec.addSample({ t: 1, dt: 0, thrust: 1, voltage: 14, current: 1, power: 14, rpm: null, temp: null, torque: null, out: 0.2 });
    for (const p of s.points) rec.addPoint(p);
    rec.finish('completed');
    if (sigma === null) open = rec.id;
    else ducted = rec.id;
  }
  store.close();
});
afterEach(() => rmSync(dir, { recursive: true, force: true }));

it('lists, filters by tag, and prints JSON with the documented fields', async () => {
  const all = await run(sessionsMain, ['list', '--data-dir', dir, '--json']);
  expect(all.code).toBe(0);
  const rows = JSON.parse(all.stdout);
  expect(rows).toHaveLength(2);
  for (const r of rows) for (const k of ['id', 'tags', 'title', 'outcome', 'started_at', 'sample_count']) expect(r).toHaveProperty(k);
  const tagged = JSON.parse((await run(sessionsMain, ['list', '--tag', 'ducted', '--data-dir', dir, '--json'])).stdout);
  expect(tagged.map((r: { id: number }) => r.id)).toEqual([ducted]);
  const text = await run(sessionsMain, ['list', '--data-dir', dir]);
  expect(text.stdout).toMatch(/completed/);
});

it('tags, shows, exports, imports, reports and deletes', async () => {
  expect((await run(sessionsMain, ['tag', String(ducted), '--add', 'lip-8', '--remove', 'ducted', '--data-dir', dir])).stdout).toMatch(/tags lip-8/);
  const show = JSON.parse((await run(sessionsMain, ['show', String(ducted), '--data-dir', dir, '--json'])).stdout);
  expect(show.tags).toEqual(['lip-8']);
  expect(show.points).toHaveLength(30);

  const csvFile = join(dir, 'points.csv');
  expect((await run(sessionsMain, ['export', String(ducted), '--format', 'csv', '--what', 'points', '--out', csvFile, '--data-dir', dir])).code).toBe(0);
  expect(readFileSync(csvFile, 'utf8').split('\n')[0]).toMatch(/^# ductbench session export v1/);
  const imp = await run(sessionsMain, ['import', csvFile, '--data-dir', dir, '--json']);
  expect(imp.code).toBe(0);
  const newId = JSON.parse(imp.stdout).id as number;
  expect(JSON.parse((await run(sessionsMain, ['show', String(newId), '--data-dir', dir, '--json'])).stdout).points).toHaveLength(30);

  const json = await run(sessionsMain, ['export', String(open), '--format', 'json', '--data-dir', dir]);
  expect(JSON.parse(json.stdout).format).toBe('ductbench-session');

  const html = join(dir, 'r.html');
  expect((await run(sessionsMain, ['report', String(ducted), '--out', html, '--data-dir', dir])).code).toBe(0);
  const page = readFileSync(html, 'utf8');
  expect(page).toMatch(/<svg/);
  expect(page).toMatch(/eye protection/);
  expect(page).not.toMatch(/<script|src="http|href="http/);

  expect((await run(sessionsMain, ['delete', String(newId), '--data-dir', dir])).code).toBe(2);
  expect((await run(sessionsMain, ['delete', String(newId), '--yes', '--data-dir', dir])).code).toBe(0);
  const gone = await run(sessionsMain, ['show', String(newId), '--data-dir', dir]);
  expect(gone.code).toBe(1);
  expect(gone.stderr).toMatch(new RegExp(`no session with id ${newId}`));
});

it('bad usage exits 2 with one line naming the problem', async () => {
  for (const argv of [
    ['list', '--bogus'],
    ['show'],
    ['show', 'abc'],
    ['export', '1', '--format', 'xml'],
    ['tag', '1'],
    ['frobnicate'],
  ]) {
    const r = await run(sessionsMain, [...argv, '--data-dir', dir]);
    expect(r.code, argv.join(' ')).toBe(2);
    expect(r.stderr.trim().split('\n'), argv.join(' ')).toHaveLength(1);
  }
  const bad = join(dir, 'bad.csv');
  writeFileSync(bad, 't_ms,thrust_N\n1,2\n3,x\n');
  const r = await run(sessionsMain, ['import', bad, '--data-dir', dir]);
  expect(r.code).toBe(2);
  expect(r.stderr).toMatch(/line 3: field 2 \(thrust_N\) "x" is not a number/);
  const c = await run(compareMain, [String(open), '--data-dir', dir]);
  expect(c.code).toBe(2);
  expect((await run(compareMain, [String(open), String(ducted), '--mass', '1', '--data-dir', dir])).stderr).toMatch(/needs all of --mass, --motors and --battery-wh/);
});

it('compare prints the documented JSON, a verdict, and writes a report', async () => {
  const html = join(dir, 'c.html');
  const r = await run(compareMain, [String(open), String(ducted), '--data-dir', dir, '--json', '--mass', '1.2', '--motors', '4', '--battery-wh', '50', '--report', html]);
  expect(r.code).toBe(0);
  const j = JSON.parse(r.stdout);
  expect(j.baseline).toBe(open);
  expect(j.rows.length).toBeGreaterThan(0);
  for (const row of j.rows) {
    expect(row.session).toBe(ducted);
    for (const k of ['thrust_N', 'power_saving_pct', 'thrust_gain_pct', 'net_thrust_N', 'ideal_saving_pct']) expect(row).toHaveProperty(k);
    // Momentum theory, sigma 1: 1 - 1/sqrt(2) (CHECKS.md).
    expect(row.power_saving_pct).toBeCloseTo(29.29, 1);
  }
  expect(j.common_range_N).toHaveLength(2);
  expect(Array.isArray(j.notes)).toBe(true);
  // A 300 g duct per motor on a 1.2 kg quad costs more than the duct saves.
  expect(j.verdict.sessions[1].outcome).toBe('loses');
  expect(j.verdict.text[1]).toMatch(/LOSES/);
  expect(existsSync(html)).toBe(true);
  const text = await run(compareMain, [String(open), String(ducted), '--data-dir', dir]);
  expect(text.stdout).toMatch(/saving %/);
  expect(text.stdout).toMatch(/29\.3/);
  const missing = await run(compareMain, [String(open), '999', '--data-dir', dir]);
  expect(missing.code).toBe(1);
  expect(missing.stderr).toMatch(/no session with id 999/);
});
