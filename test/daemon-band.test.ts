// The prediction carries its uncertainty, end to end on the in-process virtual bench (whose physics the model
// never sees): before any calibration the band is the stated spread (server/model/band.ts PRIOR_GPW_SPREAD at
// BAND_K), the dashboard's staircase starts from a recorded zero, its points lie inside that band and no
// prediction-deviation warning fires; the completed open sweep calibrates the model, the band narrows to what
// the fit's covariance and scatter say, and a second sweep's points lie inside the narrow band.

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHECKLIST_IDS, type RunPointView, type SequenceRunView, type ServerMessage } from '../server/api/messages.js';
import { startDaemon, type LivePrediction, type RunningDaemon } from '../server/daemon.js';
import { BAND_K, PRIOR_GPW_SPREAD } from '../server/model/band.js';
import { TestClient } from './helpers/ws-client.js';

let d: RunningDaemon;
let dir: string;
let c: TestClient;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-band-'));
  d = await startDaemon({ source: { kind: 'sim', seed: 8 }, httpPort: 0, dataDir: dir, log: () => {} });
  await d.firstConnect;
  c = await TestClient.connect(d.port, d.token);
  expect((await c.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).ok).toBe(true);
});
afterAll(async () => {
  c?.close();
  await d?.close();
  await rm(dir, { recursive: true, force: true });
});

function prediction(): LivePrediction {
  let p: LivePrediction | undefined = c.snapshot!.extras.prediction as LivePrediction;
  for (const m of c.messages) if (m.type === 'extras' && m.extras.prediction) p = m.extras.prediction as LivePrediction;
  return p!;
}

/** Half-widths of the band, relative to the prediction (null where nothing is predicted: below the ESC's start). */
const halfWidths = (p: LivePrediction) => p.grams_per_watt.map((g, i) => (g > 0 && p.band_hi_gpw[i] !== null ? (p.band_hi_gpw[i] - g) / g : null));
let priorWidths: (number | null)[] = [];
/** Session of the last sweep: the fit in force is the one made on it. */
let lastSession: number | null = null;

type Reply = Extract<ServerMessage, { type: 'reply' }>;

/** The dashboard's default staircase (20 to 60 % by 10, the sequence panel's form), start to end. */
async function staircase(): Promise<{ run: SequenceRunView; points: RunPointView[]; warnings: string[] }> {
  const mark = c.messages.length;
  const id = 777 + mark;
  c.ws.send(JSON.stringify({ type: 'sequence_start', id, source: { kind: 'staircase', start: 0.2, stop: 0.6, step: 0.1, hold_s: 4, window_s: 1.5, ramp_s: 1 } }));
  let r: Reply | undefined;
  await c.until(() => (r = c.messages.find((m): m is Reply => m.type === 'reply' && m.id === id)) !== undefined, 15_000, 'start reply');
  expect(r, JSON.stringify(r)).toMatchObject({ ok: true });
  const run = (r as { data: SequenceRunView }).data;
  await c.until(() => c.messages.slice(mark).some((m) => m.type === 'run' && m.run.run === run.run && m.run.outcome !== null), 90_000, 'run over');
  const after = c.messages.slice(mark);
  const points = after.filter((m): m is Extract<ServerMessage, { type: 'run_point' }> => m.type === 'run_point' && m.run === run.run).map((m) => m.point);
  const warnings = after.filter((m) => m.type === 'event' && m.event.kind === 'warning' && /prediction_deviation/.test(m.event.text)).map((m) => (m as { event: { text: string } }).event.text);
  expect(after.find((m) => m.type === 'run' && m.run.outcome !== null && m.run.run === run.run)).toMatchObject({ run: { outcome: 'completed' } });
  return { run, points, warnings };
}

describe('the prediction band', () => {
  it('is the stated spread before calibration: wide, and the zeroed staircase lies inside it without deviation warnings', async () => {
    const p = prediction();
    expect(p.band_source.kind).toBe('prior');
    expect(p.fit).toBeNull();
    // At least the stated spread everywhere; wider where the sensors' zeros weigh (low throttle), and not by
    // much at the top (a 0.15 A current zero on a hundred watts and more).
    priorWidths = halfWidths(p);
    const finite = priorWidths.filter((h): h is number => h !== null);
    expect(finite.length).toBeGreaterThan(20);
    for (const h of finite) expect(h).toBeGreaterThanOrEqual(BAND_K * PRIOR_GPW_SPREAD - 1e-12);
    expect(finite[finite.length - 1]).toBeLessThan(BAND_K * PRIOR_GPW_SPREAD * 1.1);
    expect(finite[0]).toBeGreaterThan(finite[finite.length - 1]);
    const { points, warnings } = await staircase();
    expect(points).toHaveLength(5);
    const dev = points.map((q) => q.deviation_pct);
    console.log(`before calibration: deviations ${dev.map((x) => x?.toFixed(1)).join(', ')} % against a band of ±${(BAND_K * PRIOR_GPW_SPREAD * 100).toFixed(0)} %`);
    for (const q of points) {
      expect(q.predicted?.grams_per_watt_lo).toBeLessThan(q.predicted!.grams_per_watt);
      expect(q.predicted?.grams_per_watt_hi).toBeGreaterThan(q.predicted!.grams_per_watt);
      expect(q.within_band, `step ${q.index + 1}: ${q.grams_per_watt} g/W against ${q.predicted?.grams_per_watt_lo}..${q.predicted?.grams_per_watt_hi}`).toBe(true);
    }
    expect(warnings).toEqual([]);
  }, 120_000);

  it('narrows once calibrated on that open sweep, and the next sweep lies inside the narrow band', async () => {
    await c.until(() => prediction().band_source.kind === 'fit', 10_000, 'calibrated prediction');
    const p = prediction();
    expect(p.fit?.points).toBe(5);
    const h = halfWidths(p);
    console.log(`after calibration: band ${h.map((x, i) => `${p.throttle[i]}:${x === null ? '-' : (x * 100).toFixed(1)}`).join(' ')} % (${p.band_source.text}); before ${priorWidths.map((x) => (x === null ? '-' : (x * 100).toFixed(1))).join(' ')}`);
    // Narrow: inside the stated band wherever the sweep measured, and at most half as wide where the sensors'
    // zeros no longer dominate (from 40 % throttle up).
    const covered = p.throttle.map((t, i) => ({ t, h: h[i], prior: priorWidths[i] })).filter((x) => x.t >= 0.2 && x.t <= 0.6);
    expect(covered.length).toBeGreaterThan(5);
    for (const x of covered) expect(x.h!, `throttle ${x.t}`).toBeLessThan(x.prior!);
    for (const x of covered.filter((x) => x.t >= 0.4)) expect(x.h!, `throttle ${x.t}`).toBeLessThan(0.5 * x.prior!);
    const { run, points, warnings } = await staircase();
    lastSession = run.session;
    console.log(`second sweep: deviations ${points.map((q) => q.deviation_pct?.toFixed(1)).join(', ')} %`);
    for (const q of points) expect(q.within_band, `step ${q.index + 1}: ${q.grams_per_watt} g/W against ${q.predicted?.grams_per_watt_lo}..${q.predicted?.grams_per_watt_hi}`).toBe(true);
    expect(warnings).toEqual([]);
  }, 120_000);

  it('is kept in the data folder: a daemon started again on it predicts with the fit and its narrow band', async () => {
    // The second sweep calibrated the model again; its prediction follows the run's end.
    await c.until(() => prediction().fit?.session === lastSession, 10_000, 'the fit on the second sweep');
    const before = prediction();
    c.close();
    await d.close();
    d = await startDaemon({ source: { kind: 'sim', seed: 9 }, httpPort: 0, dataDir: dir, log: () => {} });
    await d.firstConnect;
    c = await TestClient.connect(d.port, d.token);
    await c.until(() => (c.snapshot!.extras.prediction as LivePrediction | null)?.band_source?.kind !== undefined || c.messages.some((m) => m.type === 'extras' && m.extras.prediction), 10_000, 'a prediction');
    const p = prediction();
    expect(p.band_source.kind).toBe('fit');
    expect(p.fit?.points).toBe(before.fit?.points);
    expect(p.fit?.parameters).toEqual(before.fit?.parameters);
    // The same band to a small fraction of its width (the reloaded band was seen 0.1 % of the prediction off the
    // first daemon's; the cause is not found yet).
    p.band_hi_gpw.forEach((hi, i) => {
      if (hi === null || before.band_hi_gpw[i] === null) return expect(hi).toBe(before.band_hi_gpw[i]);
      expect(Math.abs(hi - before.band_hi_gpw[i]) / (before.band_hi_gpw[i] - before.grams_per_watt[i])).toBeLessThan(0.05);
    });
  });
});
