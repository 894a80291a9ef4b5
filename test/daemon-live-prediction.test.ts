// The live prediction the dashboard overlays follows the supply voltage measured on the bench: a pack at
// 30 % charge is drawn as such, not as the charged pack the model assumes without a measurement.

import { mkdtemp, rm, writeFile } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { startDaemon, type LivePrediction, type RunningDaemon } from '../server/daemon.js';
import { DEFAULT_OPEN_RIG } from '../server/sim/default-rigs.js';
import { lipoCellOcv } from '../server/sim/index.js';
import { buildRigModel, predictCurve, PACK_CELL_VOLTAGE } from '../server/model/index.js';
import { SupplyEstimate, MIN_INTERVAL_MS } from '../server/bench/supply-estimate.js';
import { TestClient } from './helpers/ws-client.js';

function predictions(c: TestClient): LivePrediction[] {
  const out: LivePrediction[] = [];
  for (const m of c.messages) {
    const e = (m.type === 'snapshot' || m.type === 'extras' ? m.extras : undefined) as Record<string, unknown> | undefined;
    if (e?.prediction) out.push(e.prediction as LivePrediction);
  }
  return out;
}

describe('supply estimate', () => {
  it('adds the sag through the internal resistance, smooths, and offers a new value only when it moved', () => {
    const s = new SupplyEstimate(0.05);
    expect(s.take(0)).toBeNull();
    s.add(0, 15, 10); // 15 V under 10 A through 0.05 ohm: 15.5 V at rest
    expect(s.value).toBeCloseTo(15.5, 12);
    expect(s.take(0)).toBeCloseTo(15.5, 12);
    s.add(100, 15.01, 10);
    expect(s.take(MIN_INTERVAL_MS + 100)).toBeNull(); // moved by less than the step
    for (let t = 200; t <= 20_000; t += 100) s.add(t, 14.5, 10);
    expect(s.value).toBeCloseTo(15, 3);
    expect(s.take(20_000)).toBeCloseTo(15, 3);
    expect(s.take(20_050)).toBeNull(); // too soon
    s.add(20_100, null, 3);
    s.add(20_200, 0, 3);
    expect(s.value).toBeCloseTo(15, 3);
    s.reset();
    expect(s.value).toBeNull();
    expect(() => new SupplyEstimate(-1)).toThrow(/internalResistance_ohm/);
  });
});

describe('the daemon draws the live prediction for the measured supply', () => {
  let dir: string;
  let d: RunningDaemon;
  let c: TestClient;
  beforeAll(async () => {
    dir = await mkdtemp(join(tmpdir(), 'ductbench-supply-'));
    const rigFile = join(dir, 'low-pack.json');
    await writeFile(rigFile, JSON.stringify({ ...DEFAULT_OPEN_RIG, sim: { initial_soc: 0.3 } }));
    d = await startDaemon({ source: { kind: 'sim', rigFile, seed: 5 }, httpPort: 0, log: () => {} });
    await d.firstConnect;
    c = await TestClient.connect(d.port, d.token);
  });
  afterAll(async () => {
    c?.close();
    await d?.close();
    await rm(dir, { recursive: true, force: true });
  });

  it('starts on the rig default and moves to the measured pack voltage', async () => {
    await c.until(() => predictions(c).some((p) => p.supply_source === 'measured'), 10_000, 'a prediction from the measured supply');
    const all = predictions(c);
    const measured = all.filter((p) => p.supply_source === 'measured').at(-1)!;
    for (const p of all.filter((x) => x.supply_source === 'rig')) expect(p.supply_v).toBeCloseTo(4 * PACK_CELL_VOLTAGE, 9);
    // What the curve would be without the measurement: the model on a charged pack.
    const charged = predictCurve(buildRigModel(DEFAULT_OPEN_RIG), { throttles: measured.throttle });
    // The bench's pack: 4 cells at 30 % charge, its own open-circuit curve (server/sim/truth.ts).
    const pack = 4 * lipoCellOcv(0.3);
    expect(Math.abs(measured.supply_v - pack)).toBeLessThan(0.15);
    // First-order motor model: less voltage, less speed, less thrust at the same throttle.
    expect(measured.thrust_N.at(-1)!).toBeLessThan(charged.points.at(-1)!.thrust_N * 0.95);
    expect(measured.throttle).toEqual(measured.throttle.slice().sort((a, b) => a - b));
  });
});
