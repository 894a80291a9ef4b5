// Physics sanity of the virtual bench's truth model and sensors: plausible numbers for a 0.254 m two-blade
// propeller on a 4-cell pack, momentum-theory limits for the duct, heating, sag, determinism, rig files.

import { mkdtempSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { describe, expect, it } from 'vitest';
import type { RigSpec } from '../server/model/rig-types.js';
import { VirtualBench } from '../server/sim/bench.js';
import { DEFAULT_DUCTED_RIG, DEFAULT_OPEN_RIG } from '../server/sim/default-rigs.js';
import { BenchHost } from '../server/sim/host-harness.js';
import { loadSimRig } from '../server/sim/rig-file.js';
import { SIM_DEFAULTS } from '../server/sim/sim-constants.js';
import { ductFactors } from '../server/sim/truth.js';

const G0 = 9.80665; // standard gravity (CGPM 1901), for grams-force

interface Steady {
  thrustN: number;
  shaftW: number;
  electricW: number;
  rpm: number;
}

function steadyAt(rig: RigSpec, throttle: number, ms = 1500): Steady {
  const bench = new VirtualBench({ rig, seed: 11 });
  const host = new BenchHost(bench);
  host.handshake();
  host.command('ARM');
  if (throttle > 0) host.command('THR', { v: throttle });
  host.run(ms);
  const t = bench.truth;
  return { thrustN: t.thrustN, shaftW: t.shaftPowerW, electricW: t.busVoltageV * t.busCurrentA, rpm: t.rpm };
}

/** Throttle at which `rig` gives `thrustN`, by bisection over steady states. */
function throttleFor(rig: RigSpec, thrustN: number): number {
  let lo = 0.05;
  let hi = 0.9;
  for (let k = 0; k < 14; k++) {
    const mid = (lo + hi) / 2;
    if (steadyAt(rig, mid, 1200).thrustN < thrustN) lo = mid;
    else hi = mid;
  }
  return Number(((lo + hi) / 2).toFixed(4));
}

describe('open propeller', () => {
  const throttles = [0.3, 0.5, 0.7, 0.9];
  const points = throttles.map((u) => steadyAt(DEFAULT_OPEN_RIG, u));

  it('thrust and rpm rise with throttle, to a static thrust of several newtons at the ceiling', () => {
    for (let k = 1; k < points.length; k++) {
      expect(points[k].thrustN).toBeGreaterThan(points[k - 1].thrustN);
      expect(points[k].rpm).toBeGreaterThan(points[k - 1].rpm);
    }
    const top = points[points.length - 1];
    expect(top.thrustN).toBeGreaterThan(8);
    expect(top.thrustN).toBeLessThan(16);
    expect(top.rpm).toBeGreaterThan(7000);
    expect(top.rpm).toBeLessThan(12000);
  });

  it('has a static figure of merit of 0.4..0.8', () => {
    // FM = T^1.5 / (P sqrt(2 rho A)): momentum theory (Leishman, Principles of Helicopter Aerodynamics).
    // Small two-blade propellers reach about 0.5 to 0.7 statically: Brandt and Selig, Propeller performance
    // data at low Reynolds numbers, AIAA 2011-1255 (from memory); the wider band allows for the rpm range.
    const D = DEFAULT_OPEN_RIG.propeller.diameter_m;
    const A = (Math.PI * D * D) / 4;
    const rho = SIM_DEFAULTS.air_density_kg_m3;
    for (const p of points) {
      const fm = p.thrustN ** 1.5 / (p.shaftW * Math.sqrt(2 * rho * A));
      expect(fm).toBeGreaterThan(0.4);
      expect(fm).toBeLessThan(0.8);
    }
  });

  it('has static coefficients in the range of small two-blade propellers, varying a little with rpm', () => {
    // CT near 0.08..0.16 statically: Brandt and Selig, AIAA 2011-1255 (from memory).
    const bench = new VirtualBench();
    const lowRe = bench.coefficients(3000);
    const highRe = bench.coefficients(9000);
    for (const c of [lowRe, highRe]) {
      expect(c.ct).toBeGreaterThan(0.08);
      expect(c.ct).toBeLessThan(0.16);
      // FM from coefficients: sqrt(2/pi) CT^1.5 / CP (CHECKS.md).
      const fm = (Math.sqrt(2 / Math.PI) * c.ct ** 1.5) / c.cp;
      expect(fm).toBeGreaterThan(0.4);
      expect(fm).toBeLessThan(0.8);
    }
    expect(highRe.ct).toBeGreaterThan(lowRe.ct);
    expect(highRe.cpProfile).toBeLessThan(lowRe.cpProfile);
  });

  it('gives roughly 4..10 grams per watt of electrical power from half throttle up', () => {
    for (const p of points.slice(1)) {
      const gPerW = p.thrustN / (G0 * 1e-3) / p.electricW;
      expect(gPerW).toBeGreaterThan(4);
      expect(gPerW).toBeLessThan(10);
    }
  });
});

describe('duct', () => {
  it('gives more thrust per watt than the open rotor at equal thrust', () => {
    const open = steadyAt(DEFAULT_OPEN_RIG, 0.7);
    const u = throttleFor(DEFAULT_DUCTED_RIG, open.thrustN);
    const ducted = steadyAt(DEFAULT_DUCTED_RIG, u);
    expect(Math.abs(ducted.thrustN - open.thrustN) / open.thrustN).toBeLessThan(0.01);
    expect(ducted.thrustN / ducted.electricW).toBeGreaterThan((open.thrustN / open.electricW) * 1.05);
    // ... but never better than ideal momentum theory allows for the induced part: at equal thrust the shaft
    // power ratio stays above 1/sqrt(2 sigma) (McCormick 1967; CHECKS.md, from memory).
    const f = ductFactors(DEFAULT_DUCTED_RIG, SIM_DEFAULTS)!;
    expect(ducted.shaftW / open.shaftW).toBeGreaterThan(1 / Math.sqrt(2 * f.sigma));
  });

  it('never beats ideal momentum theory, even with every loss switched off', () => {
    // Momentum theory, shrouded rotor: at equal power T_ducted / T_open = (2 sigma)^(1/3), 1.26 at sigma = 1
    // (McCormick, Aerodynamics of V/STOL Flight, 1967; CHECKS.md, from memory). The bench's thrust ratio is
    // at equal rotor speed, which in its physics is equal shaft power.
    const D = 0.254;
    const perfect = { ...SIM_DEFAULTS, duct_efficiency: 1, duct_wall_friction: 0 };
    for (let sigma = 0.55; sigma <= 1.6; sigma += 0.05) {
      // Zero gap, a lip of a third of the radius, a diffuser long enough to stay attached.
      const rig: RigSpec = {
        ...DEFAULT_OPEN_RIG,
        duct: { bore_diameter_m: D * 1.000001, inlet_lip_radius_m: 0.045, exit_diameter_m: D * Math.sqrt(sigma), length_m: 0.7, mass_kg: 0.1 },
      };
      const f = ductFactors(rig, perfect)!;
      expect(f.thrustRatio).toBeLessThanOrEqual(Math.cbrt(2 * Math.max(sigma, 0.5)) + 1e-9);
      expect(f.thrustRatio).toBeGreaterThanOrEqual(1);
    }
  });

  it('keeps less with a wider tip gap, more with a larger lip, and a stalled diffuser costs thrust', () => {
    // Directions of change from Pereira and Chopra, JAHS 54(1), 2009 (CHECKS.md); the magnitudes are the
    // bench's own tables.
    const base = DEFAULT_DUCTED_RIG.duct!;
    const at = (d: Partial<typeof base>) => ductFactors({ ...DEFAULT_DUCTED_RIG, duct: { ...base, ...d } }, SIM_DEFAULTS)!;
    const ref = at({});
    expect(at({ bore_diameter_m: 0.254 + 2 * 0.003 }).thrustRatio).toBeLessThan(ref.thrustRatio);
    expect(at({ inlet_lip_radius_m: 0.005 }).thrustRatio).toBeLessThan(ref.thrustRatio);
    expect(at({ inlet_lip_radius_m: 0.03 }).thrustRatio).toBeGreaterThan(ref.thrustRatio);
    // Most of the gain gone by a few percent of the radius.
    const wide = at({ bore_diameter_m: 0.254 * 1.05 });
    expect(wide.thrustRatio - 1).toBeLessThan(0.3 * (ref.thrustRatio - 1));
    const steep = at({ exit_diameter_m: 0.3, length_m: 0.06 });
    expect(steep.diffuserHalfAngleDeg * 2).toBeGreaterThan(steep.stallOnsetTotalDeg);
    expect(steep.sigmaCredited).toBeLessThan(steep.sigma);
    expect(steep.stallPenalty).toBeGreaterThan(0);
    // A fully stalled diffuser is worse than the straight duct of the same bore and length.
    const straight = at({ exit_diameter_m: base.bore_diameter_m, length_m: 0.04 });
    const stalled = at({ exit_diameter_m: 0.33, length_m: 0.04 });
    expect(stalled.diffuserCredit).toBe(0);
    expect(stalled.thrustRatio).toBeLessThan(straight.thrustRatio);
  });
});

describe('heating and sag', () => {
  it('heats the winding at full throttle, raising its resistance, and the case sensor follows', () => {
    const bench = new VirtualBench({ seed: 12 });
    const host = new BenchHost(bench);
    host.handshake();
    const r0 = bench.truth.windingResistanceOhm;
    host.command('ARM');
    host.command('THR', { v: 0.9 });
    host.run(1000);
    const vLoaded = bench.truth.busVoltageV;
    const temp0 = host.of('TEL').filter((t) => t.fields.temp !== undefined)[0].fields.temp!;
    host.run(60_000);
    const t = bench.truth;
    expect(t.windingC).toBeGreaterThan(SIM_DEFAULTS.ambient_c + 10);
    expect(t.windingResistanceOhm).toBeGreaterThan(r0 * 1.04);
    expect(t.caseC).toBeLessThan(t.windingC);
    const temps = host.of('TEL').filter((f) => f.fields.temp !== undefined);
    expect(temps[temps.length - 1].fields.temp!).toBeGreaterThan(temp0 + 3);
    // A minute at ~17 A takes the pack down and the polarisation builds up: the loaded voltage sags.
    expect(t.soc).toBeLessThan(SIM_DEFAULTS.initial_soc - 0.1);
    expect(t.busVoltageV).toBeLessThan(vLoaded - 0.2);
  }, 30_000);

  it('sags under load by about the pack resistance times the current', () => {
    const bench = new VirtualBench({ seed: 13 });
    const host = new BenchHost(bench);
    host.handshake();
    host.run(100);
    const rest = bench.truth.busVoltageV;
    host.command('ARM');
    host.command('THR', { v: 0.8 });
    host.run(800);
    const t = bench.truth;
    const sag = rest - t.busVoltageV;
    const r = DEFAULT_OPEN_RIG.supply.internal_resistance_ohm;
    expect(sag).toBeGreaterThan(r * t.busCurrentA * 0.9);
    expect(sag).toBeLessThan(r * t.busCurrentA * 1.6);
  });
});

describe('sensors', () => {
  it('is deterministic for a seed and different across seeds', () => {
    const run = (seed: number): string => {
      const bench = new VirtualBench({ seed });
      const host = new BenchHost(bench);
      host.handshake();
      host.command('ARM');
      host.command('THR', { v: 0.5 });
      host.run(300);
      return JSON.stringify(host.frames);
    };
    expect(run(21)).toBe(run(21));
    expect(run(21)).not.toBe(run(22));
  });

  it('reports measurements with offsets and noise around the truth, thrust lagging a step', () => {
    const bench = new VirtualBench({ seed: 14 });
    const host = new BenchHost(bench);
    host.handshake();
    host.command('TARE');
    host.run(500);
    host.command('ARM');
    host.command('THR', { v: 0.6 });
    host.run(1500);
    host.clear();
    host.run(1000);
    const tel = host.of('TEL');
    const mean = (k: 'thrust' | 'v' | 'i' | 'rpm') => {
      const xs = tel.map((t) => t.fields[k]).filter((x): x is number => x !== undefined);
      return xs.reduce((a, b) => a + b, 0) / xs.length;
    };
    const sd = (k: 'v') => {
      const xs = tel.map((t) => t.fields[k]).filter((x): x is number => x !== undefined);
      const m = mean(k);
      return Math.sqrt(xs.reduce((a, b) => a + (b - m) ** 2, 0) / xs.length);
    };
    const t = bench.truth;
    expect(mean('thrust') / t.thrustN).toBeCloseTo(SIM_DEFAULTS.thrust_scale, 1);
    expect(mean('v') / t.busVoltageV).toBeCloseTo(1, 2);
    expect(mean('i') - t.busCurrentA).toBeGreaterThan(0); // the Hall sensor's offset
    expect(Math.abs(mean('rpm') - t.rpm) / t.rpm).toBeLessThan(0.01);
    expect(sd('v')).toBeGreaterThan(0.5 * SIM_DEFAULTS.voltage_noise_v);
    expect(sd('v')).toBeLessThan(3 * SIM_DEFAULTS.voltage_noise_v);

    // Step down: the thrust reading lags the truth by the stand and converter.
    host.command('THR', { v: 0.3 });
    bench.advance(3);
    const lagged = host.of('TEL').filter((f) => f.fields.thrust !== undefined).pop()!;
    expect(lagged.fields.thrust!).toBeGreaterThan(bench.truth.thrustN);
  });
});

describe('rig files', () => {
  const dir = mkdtempSync(join(tmpdir(), 'sim-rig-test-'));
  const write = (name: string, doc: unknown): string => {
    const p = join(dir, name);
    writeFileSync(p, JSON.stringify(doc));
    return p;
  };

  it('loads a rig with a sim section and uses it', () => {
    const p = write('ok.json', { ...DEFAULT_DUCTED_RIG, sim: { thrust_rate_hz: 10, heartbeat_timeout_ms: 250 } });
    const rig = loadSimRig(p);
    const bench = new VirtualBench({ rig });
    const host = new BenchHost(bench);
    host.send('HELLO', { proto: 1 });
    bench.advance(1);
    expect(host.last('IDENT')!.fields.caps).toContain('thrust@10');
    expect(host.last('IDENT')!.fields.hb).toBe(250);
    expect(bench.ductFactors).not.toBeNull();
  });

  it('names the field in every error', () => {
    const noDia = { ...DEFAULT_OPEN_RIG, propeller: { pitch_m: 0.1, blades: 2 } };
    expect(() => loadSimRig(write('a.json', noDia))).toThrow(/rig\.propeller\.diameter_m is required/);
    expect(() => loadSimRig(write('b.json', { ...DEFAULT_OPEN_RIG, sim: { thrust_rate_hz: 40 } }))).toThrow(/rig\.sim\.thrust_rate_hz must be one of 10, 80/);
    expect(() => loadSimRig(write('c.json', { ...DEFAULT_OPEN_RIG, sim: { thrust_noise: 1 } }))).toThrow(/rig\.sim\.thrust_noise is not a known/);
    expect(() => loadSimRig(write('d.json', { ...DEFAULT_OPEN_RIG, supply: { internal_resistance_ohm: 0.02 } }))).toThrow(/rig\.supply needs exactly one of cells or voltage_v/);
    const tight = { ...DEFAULT_DUCTED_RIG, duct: { ...DEFAULT_DUCTED_RIG.duct!, bore_diameter_m: 0.25 } };
    expect(() => loadSimRig(write('e.json', tight))).toThrow(/rig\.duct\.bore_diameter_m/);
    expect(() => loadSimRig(join(dir, 'missing.json'))).toThrow(/cannot read rig file/);
    writeFileSync(join(dir, 'f.json'), '{ not json');
    expect(() => loadSimRig(join(dir, 'f.json'))).toThrow(/not valid JSON/);
  });
});
