// Ideal sessions made from momentum theory, for tests, benchmarks and demonstrations: operating points whose
// power is exactly the actuator-disk value for the thrust. P = T^1.5 / sqrt(4 sigma rho A), which for
// sigma = 0.5 is the open rotor's T^1.5 / sqrt(2 rho A) (see CHECKS.md). Rig names are invented.

import type { OperatingPoint } from '../bench/operating-point.js';
import type { RigSpec } from '../model/rig-types.js';
import type { CompareInput } from './compare.js';
import { G0 } from './curve.js';

export interface IdealSessionSpec {
  id: number;
  title?: string;
  /** Exit-area ratio; null for an open rotor (same as sigma 0.5 in the power law). */
  sigma: number | null;
  diameter_m?: number;
  rho?: number;
  duct_mass_kg?: number;
  /** Thrusts of the operating points, N. */
  thrusts: number[];
  /** Relative standard deviation to put on thrust and power (the means stay exact). */
  relStd?: number;
  /** Scale on the ideal power (a figure of merit below 1 raises power by 1 / FM). */
  powerScale?: number;
  t0?: number;
}

export function idealPower(thrust_N: number, sigma: number | null, diameter_m: number, rho: number): number {
  const A = (Math.PI * diameter_m ** 2) / 4;
  const s = sigma ?? 0.5;
  return thrust_N ** 1.5 / Math.sqrt(4 * s * rho * A);
}

export function idealRig(name: string, diameter_m: number, sigma: number | null, duct_mass_kg = 0): RigSpec {
  return {
    name,
    propeller: { diameter_m, pitch_m: diameter_m * 0.45, blades: 2 },
    motor: { kv_rpm_per_v: 900, resistance_ohm: 0.08, no_load_current_a: 0.6, no_load_voltage_v: 10, mass_kg: 0.06 },
    esc: { efficiency: 0.95 },
    duct:
      sigma === null
        ? null
        : { bore_diameter_m: diameter_m * 1.01, inlet_lip_radius_m: diameter_m * 0.08, exit_diameter_m: diameter_m * Math.sqrt(sigma), length_m: diameter_m * 0.5, mass_kg: duct_mass_kg },
    supply: { cells: 4, internal_resistance_ohm: 0.02 },
  };
}

export function idealSession(spec: IdealSessionSpec): CompareInput {
  const D = spec.diameter_m ?? 0.254;
  const rho = spec.rho ?? 1.225;
  const rel = spec.relStd ?? 0;
  const t0 = spec.t0 ?? 1_700_000_000_000;
  const points: OperatingPoint[] = spec.thrusts.map((T, i) => {
    const P = idealPower(T, spec.sigma, D, rho) * (spec.powerScale ?? 1);
    const stat = (m: number) => ({ mean: m, std: m * rel, n: 200, min: m * (1 - 3 * rel), max: m * (1 + 3 * rel) });
    return {
      index: i,
      throttle: Math.min(1, (i + 1) / (spec.thrusts.length + 1)),
      t_start: t0 + i * 5000,
      t_end: t0 + i * 5000 + 2000,
      settled: true,
      channels: { thrust: stat(T), power: stat(P), voltage: stat(14.8), current: stat(P / 14.8) },
      grams_per_watt: T / G0 / 1e-3 / P,
      figure_of_merit: null,
      predicted: null,
      deviation_pct: null,
    };
  });
  const name = spec.sigma === null ? 'Quorrel open 10-inch' : `Quorrel ducted 10-inch sigma ${spec.sigma}`;
  return { id: spec.id, title: spec.title ?? name, rig: idealRig(name, D, spec.sigma, spec.duct_mass_kg ?? 0), points };
}
