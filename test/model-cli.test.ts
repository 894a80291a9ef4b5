import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { predictMain } from '../server/cli/predict.js';

const files: Record<string, string> = {
  'quorrel-open.json': readFileSync(new URL('../examples/rigs/quorrel-open.json', import.meta.url), 'utf8'),
  'quorrel-duct.json': readFileSync(new URL('../examples/rigs/quorrel-duct.json', import.meta.url), 'utf8'),
  'typo.json': JSON.stringify({
    ...JSON.parse(readFileSync(new URL('../examples/rigs/quorrel-duct.json', import.meta.url), 'utf8')),
    duct: { bore_diameter_m: 0.25, inlet_lip_radius_m: 0.01, exit_diameter_m: 0.266, length_m: 0.09, mass_kg: 0.08 },
  }),
  'broken.json': '{ "name": ',
};

async function run(args: string[]): Promise<{ code: number; out: string; err: string }> {
  let out = '';
  let err = '';
  const code = await predictMain(args, {
    stdout: (s) => (out += s),
    stderr: (s) => (err += s),
    readFile: (p) => {
      const f = files[p];
      if (f === undefined) throw new Error(`ENOENT: ${p}`);
      return f;
    },
  });
  return { code, out, err };
}

const FULL_KEYS = ['power_electrical_W', 'current_A', 'rpm', 'throttle', 'grams_per_watt'];

describe('ductbench predict', () => {
  it('what-if JSON: the worked example, open and ducted', async () => {
    // Worked example from ../shared/CHECKS.md: 5 N, 0.254 m, 1.225 kg/m^3 -> 31.73 W open, 20.48 W at sigma 1.2.
    const r = await run(['--prop-diameter', '0.254', '--expansion-ratio', '1.2', '--density', '1.225', '--thrust', '5,10', '--json']);
    expect(r.code).toBe(0);
    expect(r.err).toBe('');
    const j = JSON.parse(r.out);
    expect(j.density_kg_m3).toBe(1.225);
    expect(j.points).toHaveLength(2);
    expect(j.points[0].thrust_N).toBe(5);
    expect(j.points[0].ideal_power_open_W).toBeCloseTo(31.73, 2);
    expect(j.points[0].ideal_power_ducted_W).toBeCloseTo(20.48, 2);
    for (const k of FULL_KEYS) expect(j.points[0]).not.toHaveProperty(k);
    const open = JSON.parse((await run(['--prop-diameter', '0.254', '--thrust', '5', '--json'])).out);
    expect(open.points[0].ideal_power_ducted_W).toBeNull();
  });

  it('altitude sets the ISA density', async () => {
    // ISA table: 2000 m -> 1.0066 kg/m^3 (../shared/CHECKS.md).
    const j = JSON.parse((await run(['--prop-diameter', '0.254', '--altitude', '2000', '--thrust', '5', '--json'])).out);
    expect(j.density_kg_m3).toBeCloseTo(1.0066, 3);
  });

  it('rig JSON has the full shape, by throttle and by thrust', async () => {
    const r = await run(['--rig', 'quorrel-duct.json', '--throttle', '0.3,0.6,0.9', '--json']);
    expect(r.code).toBe(0);
    const j = JSON.parse(r.out);
    expect(j.points).toHaveLength(3);
    for (const p of j.points) {
      for (const k of ['thrust_N', 'ideal_power_open_W', 'ideal_power_ducted_W', ...FULL_KEYS]) expect(typeof p[k]).toBe('number');
      expect(p.grams_per_watt).toBeCloseTo(p.thrust_N / 9.80665e-3 / p.power_electrical_W, 9);
      expect(p.ideal_power_ducted_W).toBeLessThan(p.ideal_power_open_W);
    }
    expect(j.points.map((p: { throttle: number }) => p.throttle)).toEqual([0.3, 0.6, 0.9]);
    const t = JSON.parse((await run(['--rig', 'quorrel-open.json', '--thrust', '4,500', '--json'])).out);
    expect(t.points[0].thrust_N).toBe(4);
    expect(t.points[0].throttle).toBeGreaterThan(0);
    expect(t.points[0].throttle).toBeLessThan(1);
    expect(t.points[0].ideal_power_ducted_W).toBeNull();
    expect(t.points[1].reachable).toBe(false);
    expect(t.points[1].power_electrical_W).toBeNull();
  });

  it('prints a readable table without --json', async () => {
    const r = await run(['--rig', 'quorrel-open.json']);
    expect(r.code).toBe(0);
    const lines = r.out.trim().split('\n');
    expect(lines[0]).toMatch(/quorrel-open/);
    expect(lines[1]).toMatch(/thrust N/);
    expect(lines).toHaveLength(12);
    const help = await run(['--help']);
    expect(help.code).toBe(0);
    expect(help.out).toMatch(/--expansion-ratio/);
  });

  it('takes the supply voltage: by default a charged pack at 4.1 V a cell, or what --supply-v says', async () => {
    // Common practice (CHECKS.md): a lithium-polymer cell is 4.20 V full, 3.7 V nominal; 4.1 V at rest is a
    // pack near 90 % charge. The quorrel rigs have 4 cells: 16.4 V.
    const def = JSON.parse((await run(['--rig', 'quorrel-open.json', '--throttle', '1', '--json'])).out);
    expect(def.supply_v).toBeCloseTo(16.4, 12);
    expect(def.supply_source).toBe('pack');
    const low = JSON.parse((await run(['--rig', 'quorrel-open.json', '--throttle', '1', '--supply-v', '14.8', '--json'])).out);
    expect(low.supply_v).toBe(14.8);
    expect(low.supply_source).toBe('given');
    // First-order motor model (Drela 2007): at full throttle the speed follows the voltage, so a pack at
    // 3.7 V a cell turns the propeller slower, makes less thrust and draws less power than a charged one.
    const [a, b] = [def.points[0], low.points[0]];
    expect(b.rpm).toBeLessThan(a.rpm);
    expect(b.thrust_N).toBeLessThan(a.thrust_N);
    expect(b.power_electrical_W).toBeLessThan(a.power_electrical_W);
    // Under load the bus sags below the resting voltage, through the pack's internal resistance.
    expect(b.voltage_V).toBeLessThan(14.8);
    expect(b.voltage_V).toBeCloseTo(14.8 - b.current_A * 0.048, 6);
    // The same at a thrust: more throttle on the emptier pack.
    const t1 = JSON.parse((await run(['--rig', 'quorrel-open.json', '--thrust', '6', '--json'])).out).points[0];
    const t2 = JSON.parse((await run(['--rig', 'quorrel-open.json', '--thrust', '6', '--supply-v', '14.8', '--json'])).out).points[0];
    expect(t2.throttle).toBeGreaterThan(t1.throttle);
    const text = (await run(['--rig', 'quorrel-duct.json', '--thrust', '6'])).out;
    expect(text).toMatch(/supply 16\.40 V at rest \(pack at 4\.1 V a cell\)/);
    expect(text).toMatch(/lip N/);
    // The lip's share of the thrust on a ducted rig, none on an open one.
    const duct = JSON.parse((await run(['--rig', 'quorrel-duct.json', '--thrust', '6', '--json'])).out).points[0];
    expect(duct.lip_thrust_N).toBeGreaterThan(0);
    expect(duct.lip_thrust_N + duct.rotor_thrust_N).toBeCloseTo(6, 8);
    expect(t1.lip_thrust_N).toBeNull();
  });

  const bad: [string[], RegExp][] = [
    [['--rig', 'quorrel-open.json', '--supply-v', '0'], /--supply-v: must be a number of volts/],
    [['--rig', 'quorrel-open.json', '--supply-v', 'full'], /--supply-v: must be a number of volts/],
    [['--prop-diameter', '0.254', '--thrust', '5', '--supply-v', '16'], /--supply-v: needs a full rig/],
    [['--prop-diameter', 'abc', '--thrust', '5'], /^ductbench predict: --prop-diameter: must be a number of metres/],
    [['--prop-diameter', '0.254', '--expansion-ratio', '2', '--thrust', '5'], /--expansion-ratio: must be a number within 0\.5\.\.1\.6/],
    [['--prop-diameter', '0.254', '--thrust', '5,-1'], /--thrust: .*above 0 \(got '-1'\)/],
    [['--prop-diameter', '0.254'], /--thrust: required/],
    [['--thrust', '5'], /--prop-diameter: required/],
    [['--prop-diameter', '0.254', '--thrust', '5', '--throttle', '0.5'], /--throttle: give either/],
    [['--prop-diameter', '0.254', '--thrust', '5', '--altitude', '1000', '--density', '1.1'], /--density: give either --altitude or --density/],
    [['--prop-diameter', '0.254', '--altitude', '20000', '--thrust', '5'], /--altitude: must be .*-1000\.\.11000/],
    [['--rig', 'quorrel-open.json', '--throttle', '1.5'], /--throttle: must be .*0\.\.1/],
    [['--rig', 'quorrel-open.json', '--prop-diameter', '0.3'], /--prop-diameter: only for what-if/],
    [['--rig', 'typo.json'], /typo\.json: duct\.bore_diameter_m: must be larger than propeller\.diameter_m \(0\.254\)/],
    [['--rig', 'broken.json'], /--rig: broken\.json is not valid JSON/],
    [['--rig', 'missing.json'], /--rig: cannot read missing\.json/],
    [['--frobnicate'], /--frobnicate: unknown option/],
  ];
  for (const [args, msg] of bad) {
    it(`exit 2 on: ${args.join(' ')}`, async () => {
      const r = await run(args);
      expect(r.code).toBe(2);
      expect(r.out).toBe('');
      expect(r.err).toMatch(msg);
      expect(r.err.trim().split('\n')).toHaveLength(1);
    });
  }
});
