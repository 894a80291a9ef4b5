// A propeller described by measured static coefficients instead of blade geometry. Used for an open rig
// whose propeller comes with a static table: between table speeds CT and CP are interpolated linearly in
// rpm, outside they are held at the end values (static coefficients of small propellers drift only slowly
// with speed, through the Reynolds number). A duct changes the propeller's inflow, so a table measured in the
// open says nothing reliable about the ducted propeller; predict.ts uses BEMT for ducted rigs.

import type { AirState } from './atmosphere.js';
import type { PropellerLoad } from './motor.js';
import { interp1, solveBracketed } from './numeric.js';

export interface StaticTable {
  rpm: number[];
  ct: number[];
  cp: number[];
}

export function tableLoad(table: StaticTable, diameter_m: number, air: AirState): PropellerLoad {
  const rho = air.density_kg_m3;
  const D4 = diameter_m ** 4;
  const D5 = diameter_m ** 5;
  const thrustAt = (omega: number): number => {
    const n = omega / (2 * Math.PI);
    return interp1(table.rpm, table.ct, n * 60) * rho * n * n * D4;
  };
  const torqueAt = (omega: number): number => {
    const n = omega / (2 * Math.PI);
    return omega > 0 ? (interp1(table.rpm, table.cp, n * 60) * rho * n * n * n * D5) / omega : 0;
  };
  const omegaForThrust = (thrust_N: number): number => {
    if (!(thrust_N > 0)) return 0;
    // Thrust grows as n^2 times a slowly varying CT: bracket between the speeds the extreme CTs would need.
    const ctMin = Math.min(...table.ct);
    const ctMax = Math.max(...table.ct);
    const nFor = (ct: number): number => Math.sqrt(thrust_N / (ct * rho * D4));
    const lo = 2 * Math.PI * nFor(ctMax) * 0.999;
    const hi = 2 * Math.PI * nFor(ctMin) * 1.001;
    return solveBracketed((w) => thrustAt(w) - thrust_N, lo, hi, 1e-12);
  };
  return { thrustAt, torqueAt, omegaForThrust };
}
