// What a duct means for a whole vehicle in hover. Each motor must carry its share of the all-up weight, and a
// ducted motor also its own duct: hover thrust per motor = (mass * g0) / motors + duct mass * g0. The power at
// that thrust comes from each session's measured curve; outside the measured range there is no answer, and the
// verdict says so rather than guessing. Endurance = battery energy / total electrical power (no reserve).
// Pure: numbers in, numbers and sentences out.

import { effectiveSd, evaluate, G0, type Curve } from './curve.js';
import type { SessionCurveInfo } from './compare.js';

export interface VehicleSpec {
  /** All-up mass without ducts, kg (each ducted session adds its own duct mass per motor). */
  mass_kg: number;
  motors: number;
  /** Usable battery energy, Wh. */
  battery_wh: number;
}

export interface VehicleSessionResult {
  session: number;
  title: string;
  duct_mass_kg: number;
  hover_thrust_per_motor_N: number;
  /** Part of the hover thrust that only lifts the duct. */
  duct_weight_N: number;
  measured_range_N: [number, number] | null;
  in_range: boolean;
  power_per_motor_W: number | null;
  power_per_motor_std_W: number | null;
  total_power_W: number | null;
  endurance_min: number | null;
  /** Against the baseline: (P / P_baseline - 1) * 100; negative saves power. */
  power_change_pct: number | null;
  endurance_change_min: number | null;
  /** Duct mass per motor at which this session would draw the baseline's hover power; null when not measurable. */
  break_even_duct_mass_kg: number | null;
  /** 'wins' | 'loses' | 'even' (difference inside the measurement scatter) | 'unknown' (outside a measured range). */
  outcome: 'baseline' | 'wins' | 'loses' | 'even' | 'unknown';
}

export interface VehicleVerdict {
  vehicle: VehicleSpec;
  sessions: VehicleSessionResult[];
  /** Plain sentences, one per compared session, then a summary line. */
  text: string[];
}

const f1 = (x: number) => x.toFixed(1);
const f2 = (x: number) => x.toFixed(2);
const grams = (kg: number) => `${(kg * 1000).toFixed(0)} g`;

export function validateVehicle(v: VehicleSpec): void {
  if (!(v.mass_kg > 0 && Number.isFinite(v.mass_kg))) throw new RangeError('vehicle mass must be a positive number of kg');
  if (!(Number.isInteger(v.motors) && v.motors >= 1)) throw new RangeError('motor count must be a whole number of at least 1');
  if (!(v.battery_wh > 0 && Number.isFinite(v.battery_wh))) throw new RangeError('battery energy must be a positive number of Wh');
}

export function vehicleVerdict(infos: readonly SessionCurveInfo[], power: ReadonlyMap<number, Curve>, thrust: ReadonlyMap<number, Curve>, v: VehicleSpec): VehicleVerdict {
  validateVehicle(v);
  const perMotor = (v.mass_kg * G0) / v.motors;
  const results: VehicleSessionResult[] = infos.map((s) => {
    const ductW = s.duct_mass_kg * G0;
    const T = perMotor + ductW;
    const c = power.get(s.session);
    const val = c ? evaluate(c, T) : null;
    const P = val ? val.y : null;
    return {
      session: s.session,
      title: s.title,
      duct_mass_kg: s.duct_mass_kg,
      hover_thrust_per_motor_N: T,
      duct_weight_N: ductW,
      measured_range_N: s.thrust_range_N,
      in_range: val !== null,
      power_per_motor_W: P,
      power_per_motor_std_W: val ? effectiveSd(val) : null,
      total_power_W: P === null ? null : P * v.motors,
      endurance_min: P === null ? null : (v.battery_wh / (P * v.motors)) * 60,
      power_change_pct: null,
      endurance_change_min: null,
      break_even_duct_mass_kg: null,
      outcome: 'unknown',
    };
  });
  const base = results[0];
  base.outcome = 'baseline';
  const text: string[] = [];
  const who = (r: VehicleSessionResult) => `Session ${r.session}${r.title ? ` ("${r.title}")` : ''}`;
  const outside = (r: VehicleSessionResult) =>
    r.measured_range_N
      ? `hover needs ${f2(r.hover_thrust_per_motor_N)} N per motor${r.duct_weight_N > 0 ? ` (${f2(r.duct_weight_N)} N of it for the duct)` : ''}, outside the measured ${f2(r.measured_range_N[0])}–${f2(r.measured_range_N[1])} N; no figure without extrapolating — measure that thrust`
      : 'has no usable power curve';
  if (!base.in_range) text.push(`Baseline, ${who(base).replace('Session', 'session')}: ${outside(base)}.`);
  else
    text.push(
      `Baseline, ${who(base).replace('Session', 'session')}: hover at ${f2(base.hover_thrust_per_motor_N)} N per motor takes ${f1(base.power_per_motor_W!)} W per motor, ${f1(base.total_power_W!)} W in all: ${f1(base.endurance_min!)} min on ${f1(v.battery_wh)} Wh.`,
    );
  for (const r of results.slice(1)) {
    // Break-even: the thrust at which this session draws the baseline's hover power, less the bare per-motor share.
    if (base.in_range) {
      const eq = thrust.get(r.session) ? evaluate(thrust.get(r.session)!, base.power_per_motor_W!) : null;
      if (eq) r.break_even_duct_mass_kg = (eq.y - perMotor) / G0;
    }
    if (!r.in_range) {
      text.push(`${who(r)}: ${outside(r)}.`);
      continue;
    }
    if (!base.in_range) {
      text.push(`${who(r)}: ${f1(r.power_per_motor_W!)} W per motor, ${f1(r.endurance_min!)} min; no comparison, the baseline was not measured at its hover thrust.`);
      continue;
    }
    const dP = r.power_per_motor_W! - base.power_per_motor_W!;
    const sd = Math.hypot(r.power_per_motor_std_W!, base.power_per_motor_std_W!);
    r.power_change_pct = (r.power_per_motor_W! / base.power_per_motor_W! - 1) * 100;
    r.endurance_change_min = r.endurance_min! - base.endurance_min!;
    r.outcome = Math.abs(dP) <= sd ? 'even' : dP < 0 ? 'wins' : 'loses';
    const duct = r.duct_mass_kg > 0 ? ` carrying its ${grams(r.duct_mass_kg)} duct on each motor` : '';
    const figures = `${f1(r.power_per_motor_W!)} W per motor against ${f1(base.power_per_motor_W!)} W (${r.power_change_pct >= 0 ? '+' : ''}${f1(r.power_change_pct)} %), ${f1(r.endurance_min!)} min against ${f1(base.endurance_min!)} min`;
    const be =
      r.break_even_duct_mass_kg === null
        ? ''
        : r.break_even_duct_mass_kg <= 0
          ? ' Even a weightless duct would not pay here: the measured saving at this thrust is not there.'
          : ` It breaks even at a duct mass of ${grams(r.break_even_duct_mass_kg)} per motor.`;
    if (r.outcome === 'loses') {
      text.push(
        `${who(r)} LOSES for this vehicle: hovering${duct} takes ${figures}.${r.duct_mass_kg > 0 ? ' The duct weighs more than its saving is worth.' : ''}${be}`,
      );
    } else if (r.outcome === 'wins') {
      text.push(`${who(r)} wins for this vehicle: hovering${duct} takes ${figures}.${be}`);
    } else {
      text.push(`${who(r)} is even with the baseline within the measurement scatter (±${f1(sd)} W per motor): ${figures}.${be}`);
    }
  }
  return { vehicle: v, sessions: results, text };
}
