// Export and import: CSV (samples, points) and JSON round trips, and clear errors for damaged files.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeEach, describe, expect, it } from 'vitest';
import type { Sample } from '../server/bench/telemetry.js';
import { idealSession } from '../server/compare/synthetic.js';
import { ImportError } from '../server/store/errors.js';
import { exportToString, importText, POINT_CSV_COLUMNS, SAMPLE_CSV_COLUMNS, writeCsv, writeJson } from '../server/store/exchange.js';
import { SAMPLE_COLUMNS } from '../server/store/schema.js';
import { SessionStore } from '../server/store/store.js';

let dir: string;
let store: SessionStore;
let id: number;
const demo = idealSession({ id: 0, sigma: 1.1, thrusts: [0.8, 1.9, 3.3, 5.1], duct_mass_kg: 0.042, relStd: 0.013 });

beforeEach(() => {
  dir = mkdtempSync(join(tmpdir(), 'ductbench-exch-'));
  store = SessionStore.open(dir);
  const rec = store.record({
    title: 'Ducted, lip "B"',
    notes: 'second try\nafter sanding',
    tags: ['ducted', 'lip B'],
    rig: demo.rig,
    atmosphere: { density_kg_m3: 1.1987, temperature_C: 21.5 },
    calibration: { thrust: { scale: 1.0021, offset: -0.013 }, voltage: { scale: 1, offset: 0 }, current: { scale: 0.998, offset: 0.02 }, torque: { scale: 1, offset: 0 } },
    started_at: 1_700_000_000_000.5,
  });
  for (let i = 0; i < 3000; i++) {
    const s: Sample = {
      t: 1_700_000_000_000.5 + i * 2.0001,
      dt: 12.345678 + i * 0.002,
      thrust: Math.sin(i / 30) * 3.123456789,
      voltage: 14.8 - i * 1e-5,
      current: i % 3 === 0 ? null : 2.718281828,
      power: i % 3 === 0 ? null : 40.12345678,
      rpm: i % 4 === 0 ? 6543.21 : null,
      temp: 31.4159,
      torque: i % 2 ? 0.0123456789 : null,
      out: 0.33333333,
    };
    rec.addSample(s);
  }
  for (const p of demo.points) rec.addPoint(p);
  rec.addEvent({ t: 1_700_000_003_000, level: 'info', kind: 'note', text: 'operator: lip B fitted', data: { who: 'bench A' } });
  rec.finish('completed', 1_700_000_006_000);
  id = rec.id;
});
afterEach(() => {
  store.close();
  rmSync(dir, { recursive: true, force: true });
});

/** Half a unit in the last printed place. */
const halfUlp = (decimals: number) => 0.5 * 10 ** -decimals + 1e-9;

describe('CSV', () => {
  it('samples round-trip within the printed precision of each column', () => {
    const csv = exportToString((w) => writeCsv(store, id, 'samples', w));
    const lines = csv.split('\n');
    expect(lines[0]).toMatch(/^# ductbench session export v1 \{/);
    expect(lines[0]).toContain('"title":"Ducted, lip \\"B\\""');
    expect(lines[0]).toContain('"tags":["ducted","lip B"]');
    expect(lines[2]).toBe('t_ms,dt_s,thrust_N,voltage_V,current_A,power_W,rpm,temp_C,torque_Nm,out');
    const r = importText(store, csv, { sourceName: 'x.csv' });
    expect(r.what).toBe('samples');
    expect(r.samples).toBe(3000);
    const a = store.samples(id);
    const b = store.samples(r.id);
    expect(b.t).toHaveLength(3000);
    for (let i = 0; i < 3000; i++) {
      expect(Math.abs(b.t[i] - a.t[i])).toBeLessThanOrEqual(halfUlp(3));
      expect(Math.abs(b.dt[i] - a.dt[i])).toBeLessThanOrEqual(halfUlp(6));
      SAMPLE_COLUMNS.forEach((c, k) => {
        const x = a[c][i];
        const y = b[c][i];
        if (x === null) expect(y).toBeNull();
        else expect(Math.abs((y as number) - x)).toBeLessThanOrEqual(halfUlp(SAMPLE_CSV_COLUMNS[k + 2].decimals));
      });
    }
    const s = store.get(r.id);
    expect(s.title).toBe('Ducted, lip "B"');
    expect(s.tags).toEqual(['ducted', 'lip B']);
    expect(s.notes).toBe('second try\nafter sanding');
    expect(s.rig).toEqual(demo.rig);
    expect(s.outcome).toBe('completed');
    expect(s.events.some((e) => e.kind === 'import' && e.text.includes(`original session ${id}`))).toBe(true);
  });

  it('points round-trip within the printed precision', () => {
    const csv = exportToString((w) => writeCsv(store, id, 'points', w));
    const r = importText(store, csv);
    expect(r.what).toBe('points');
    const a = store.get(id).points;
    const b = store.get(r.id).points;
    expect(b).toHaveLength(a.length);
    const dec = (name: string) => POINT_CSV_COLUMNS.find((c) => c.name === name)!.decimals;
    for (let i = 0; i < a.length; i++) {
      expect(b[i].index).toBe(a[i].index);
      expect(b[i].settled).toBe(a[i].settled);
      expect(Math.abs(b[i].throttle - a[i].throttle)).toBeLessThanOrEqual(halfUlp(dec('throttle')));
      expect(Math.abs(b[i].channels.thrust!.mean - a[i].channels.thrust!.mean)).toBeLessThanOrEqual(halfUlp(dec('thrust_N')));
      expect(Math.abs(b[i].channels.thrust!.std - a[i].channels.thrust!.std)).toBeLessThanOrEqual(halfUlp(dec('thrust_std_N')));
      expect(Math.abs(b[i].channels.power!.mean - a[i].channels.power!.mean)).toBeLessThanOrEqual(halfUlp(dec('power_W')));
      expect(b[i].channels.power!.n).toBe(a[i].channels.power!.n);
      expect(b[i].channels.rpm).toBeUndefined();
      expect(Math.abs(b[i].grams_per_watt! - a[i].grams_per_watt!)).toBeLessThanOrEqual(halfUlp(dec('grams_per_watt')));
    }
  });

  it('imports a plain CSV that has only the header row', () => {
    const r = importText(store, 't_ms,thrust_N,power_W\n1000,1.5,20\n1002,1.6,\n', { title: 'hand made' });
    const b = store.samples(r.id);
    expect(b.t).toEqual([1000, 1002]);
    expect(b.power).toEqual([20, null]);
    expect(b.voltage).toEqual([null, null]);
    expect(store.get(r.id).title).toBe('hand made');
  });

  it.each([
    ['t_ms,thrust_N\n1000,1.5\n1002,abc\n', 3, /field 2 \(thrust_N\) "abc" is not a number/],
    ['t_ms,thrust_N\n1000,1.5\n1002\n', 3, /expected 2 fields like the header on line 1, found 1/],
    ['# ductbench session export v1 {"id":1}\n# context {}\nt_ms,thrust_kg\n', 3, /unknown samples column "thrust_kg"/],
    ['# some other program\nt_ms\n', 1, /not a ductbench export/],
    ['# ductbench session export v1 {broken\nt_ms\n', 1, /not valid JSON/],
    ['t_ms,thrust_N\n1000,1\n999,1\n', 3, /t_ms goes backwards/],
    ['index,throttle,t_start_ms,t_end_ms\n0,1.5,1,2\n', 2, /throttle 1.5 outside 0..1/],
    ['thrust_N,power_W\n1,2\n', 1, /neither sample columns/],
    ['t_ms,thrust_N\n1000,1\n,1\n', 3, /t_ms is empty/],
  ])('refuses a malformed CSV and names the line: %#', (text, line, problem) => {
    const before = store.list().length;
    let err: unknown;
    try {
      importText(store, text);
    } catch (e) {
      err = e;
    }
    expect(err).toBeInstanceOf(ImportError);
    expect((err as ImportError).line).toBe(line);
    expect((err as Error).message).toMatch(new RegExp(`^line ${line}: `));
    expect((err as Error).message).toMatch(problem);
    // Nothing half-imported.
    expect(store.list()).toHaveLength(before);
  });
});

describe('JSON', () => {
  it('a whole session round-trips exactly', () => {
    const text = exportToString((w) => writeJson(store, id, w));
    const r = importText(store, text);
    expect(r.what).toBe('session');
    const a = store.get(id);
    const b = store.get(r.id);
    for (const k of ['title', 'notes', 'tags', 'outcome', 'started_at', 'ended_at', 'rig', 'calibration', 'atmosphere', 'firmware', 'points', 'sample_count'] as const) {
      expect(b[k], k).toEqual(a[k]);
    }
    // The imported copy has the original events plus one saying where it came from.
    expect(b.events.slice(0, -1)).toEqual(a.events);
    expect(b.events.at(-1)!.kind).toBe('import');
    expect(store.samples(r.id)).toEqual(store.samples(id));
  });

  it('names the line of a JSON syntax error and refuses a foreign document', () => {
    const text = exportToString((w) => writeJson(store, id, w));
    const broken = text.replace('"points":', '"points"');
    expect(() => importText(store, broken)).toThrow(/^line 2: not valid JSON/);
    expect(() => importText(store, '{"format":"something-else"}')).toThrow(/not a ductbench session export/);
  });
});
