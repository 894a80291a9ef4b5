// The printable reports: self-contained (no script, no external resource), with the cautions, plots and tables.

import { expect, it } from 'vitest';
import { compareSessions } from '../server/compare/compare.js';
import { grid } from '../server/compare/curve.js';
import { renderComparisonReport, renderSessionReport, SAFETY_CAUTIONS } from '../server/compare/report.js';
import { niceTicks } from '../server/compare/svg.js';
import { idealSession } from '../server/compare/synthetic.js';
import type { SessionRecord } from '../server/store/types.js';

const thrusts = grid(0.5, 3.2, 12).map((x) => x * x);
const open = idealSession({ id: 1, sigma: null, thrusts, title: 'Open <baseline> & co' });
const ducted = idealSession({ id: 2, sigma: 1, thrusts, duct_mass_kg: 0.4 });

function selfContained(html: string): void {
  expect(html.startsWith('<!doctype html>')).toBe(true);
  expect(html).not.toMatch(/<script|<link|<img|src=|url\(|@import/i);
  expect(html).toMatch(/@media print/);
  for (const c of SAFETY_CAUTIONS) expect(html).toContain(c.replace(/&/g, '&amp;').replace(/'/g, '&#39;'));
}

it('comparison report carries plots, the grid table, notes and a verdict, escaping titles', () => {
  const c = compareSessions([open, ducted], { vehicle: { mass_kg: 1, motors: 4, battery_wh: 40 } });
  const html = renderComparisonReport(c, { generatedAt: 0 });
  selfContained(html);
  expect((html.match(/<svg/g) ?? []).length).toBe(2);
  expect(html).toContain('Open &lt;baseline&gt; &amp; co');
  expect(html).not.toContain('Open <baseline>');
  expect(html).toMatch(/class="loses"[^>]*>[^<]*LOSES/);
  expect(html).toContain('29.3');
});

it('session report shows points, rig, calibration and atmosphere', () => {
  const s: SessionRecord = {
    id: 7,
    title: 'Ducted sweep',
    notes: 'line one\nline two',
    tags: ['ducted'],
    outcome: 'tripped',
    started_at: 0,
    ended_at: 60_000,
    rig_name: ducted.rig!.name,
    sample_count: 0,
    point_count: ducted.points.length,
    rig: ducted.rig,
    calibration: { thrust: { scale: 1.002, offset: -0.01 }, voltage: { scale: 1, offset: 0 }, current: { scale: 1, offset: 0 }, torque: { scale: 1, offset: 0 } },
    atmosphere: { density_kg_m3: 1.19, source: 'measured' },
    firmware: null,
    sequence: null,
    points: ducted.points,
    events: [{ t: 30_000, level: 'error', kind: 'trip', text: 'current over limit', data: { rule: 'max_current', value: 41, limit: 40 } }],
  };
  const html = renderSessionReport(s);
  selfContained(html);
  expect(html).toContain('duct.exit_diameter_m');
  expect(html).toContain('1.002000');
  expect(html).toContain('density_kg_m3');
  expect(html).toContain('current over limit');
  expect(html).toContain('line one<br>line two');
  expect(html).toContain('No firmware identity was recorded.');
});

it('axis ticks are round numbers covering the range', () => {
  expect(niceTicks(0, 10)).toEqual([0, 2, 4, 6, 8, 10]);
  const t = niceTicks(0.37, 8.2);
  expect(t[0]).toBeGreaterThanOrEqual(0.37 - 1e-9);
  expect(t.at(-1)!).toBeLessThanOrEqual(8.2 + 1e-9);
});
