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

  const bad: [string[], RegExp][] = [
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
