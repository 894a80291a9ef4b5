// Duct against baseline: from each session's operating points, power against thrust as a piecewise-linear
// curve, compared on a common thrust grid inside the range every compared session actually measured. Pure:
// sessions in, numbers and notes out. Nothing is extrapolated; what cannot be compared is said in a note.
//
// Momentum theory (actuator disk in hover; Leishman for the open rotor, McCormick and Pereira for the shrouded
// form, see CHECKS.md): ideal power P = T^1.5 / sqrt(2 rho A) open, T^1.5 / sqrt(4 sigma rho A) with a duct of
// exit-area ratio sigma, so at equal thrust P_duct / P_open = 1 / sqrt(2 sigma). That ideal saving is the yardstick
// for "duct effectiveness" = measured saving / ideal saving.

import type { OperatingPoint } from '../bench/operating-point.js';
import type { RigSpec } from '../model/rig-types.js';
import { effectiveSd, evaluate, G0, grid, measuredPoints, powerCurve, range, thrustCurve, type Curve, type MeasuredPoint } from './curve.js';
import { vehicleVerdict, type VehicleSpec, type VehicleVerdict } from './vehicle.js';

/** What the comparison needs of a session (a stored SessionRecord has all of it). */
export interface CompareInput {
  id: number;
  title: string;
  rig: RigSpec | null;
  points: readonly OperatingPoint[];
}

export interface SessionCurveInfo {
  session: number;
  title: string;
  rig_name: string | null;
  ducted: boolean;
  /** Exit area / rotor disk area = (exit diameter / propeller diameter)^2; 0 for an open rotor. */
  sigma: number;
  duct_mass_kg: number;
  /** Operating points with thrust and power that make the curve. */
  points: MeasuredPoint[];
  /** Measured thrust range, or null with fewer than two usable points. */
  thrust_range_N: [number, number] | null;
  /** Whether the session takes part in the grid comparison (false: see notes). */
  compared: boolean;
}

export interface ComparisonRow {
  session: number;
  thrust_N: number;
  baseline_power_W: number;
  baseline_power_std_W: number;
  power_W: number;
  power_std_W: number;
  /** (1 - P / P_baseline) * 100 at equal thrust. */
  power_saving_pct: number;
  power_saving_std_pct: number;
  /** Thrust this session makes at the baseline's power for thrust_N; null when that power is outside its measured range. */
  thrust_at_equal_power_N: number | null;
  thrust_gain_pct: number | null;
  thrust_gain_std_pct: number | null;
  /** thrust_N minus the duct's weight (duct mass * g0). */
  net_thrust_N: number;
  /** Gain at equal power after each side lifts its own duct. */
  net_thrust_gain_pct: number | null;
  /** Momentum-theory saving of this session's sigma against the baseline's. */
  ideal_saving_pct: number;
  /** Measured saving / ideal saving; null when the ideal saving is zero (two open rotors). */
  duct_effectiveness: number | null;
  grams_per_watt: number;
  baseline_grams_per_watt: number;
}

export interface Comparison {
  baseline: number;
  sessions: SessionCurveInfo[];
  /** Thrust range every compared session measured; null when nothing overlaps the baseline. */
  common_range_N: [number, number] | null;
  grid_N: number[];
  rows: ComparisonRow[];
  notes: string[];
  verdict: VehicleVerdict | null;
  g0: number;
}

export interface CompareOptions {
  /** Points of the thrust grid (default 11). */
  gridPoints?: number;
  vehicle?: VehicleSpec;
}

/** sigma from a rig snapshot: (exit diameter / propeller diameter)^2, 0 for an open rotor. */
export function rigSigma(rig: RigSpec | null): number {
  if (!rig?.duct) return 0;
  return (rig.duct.exit_diameter_m / rig.propeller.diameter_m) ** 2;
}

export function ductMass(rig: RigSpec | null): number {
  return rig?.duct?.mass_kg ?? 0;
}

/** Ideal power relative to an open rotor of the same disk at equal thrust: 1 / sqrt(2 sigma), 1 when open. */
export function idealPowerFactor(sigma: number): number {
  return sigma > 0 ? 1 / Math.sqrt(2 * sigma) : 1;
}

/** Ideal fractional saving of `sigma` against `baselineSigma` at equal thrust: 1 - 1/sqrt(2 sigma) against open. */
export function idealSaving(sigma: number, baselineSigma = 0): number {
  return 1 - idealPowerFactor(sigma) / idealPowerFactor(baselineSigma);
}

/** Ideal thrust ratio at equal power against an open rotor: (2 sigma)^(1/3), 1 when open. */
export function idealThrustRatio(sigma: number): number {
  return sigma > 0 ? Math.cbrt(2 * sigma) : 1;
}

const fmt = (x: number, d = 2) => x.toFixed(d);
const rangeText = (r: [number, number]) => `${fmt(r[0])}–${fmt(r[1])} N`;

export function describeSession(s: CompareInput): SessionCurveInfo {
  const pts = measuredPoints(s.points);
  return {
    session: s.id,
    title: s.title,
    rig_name: s.rig?.name ?? null,
    ducted: !!s.rig?.duct,
    sigma: rigSigma(s.rig),
    duct_mass_kg: ductMass(s.rig),
    points: pts,
    thrust_range_N: range(powerCurve(pts)),
    compared: false,
  };
}

/** Compares sessions against the first (the baseline). */
export function compareSessions(inputs: readonly CompareInput[], opts: CompareOptions = {}): Comparison {
  if (inputs.length < 2) throw new RangeError('a comparison needs a baseline and at least one other session');
  const ids = new Set<number>();
  for (const s of inputs) {
    if (ids.has(s.id)) throw new RangeError(`session ${s.id} is given twice`);
    ids.add(s.id);
  }
  const n = opts.gridPoints ?? 11;
  const infos = inputs.map(describeSession);
  const notes: string[] = [];
  const base = infos[0];
  const pc = new Map<number, Curve>(infos.map((i) => [i.session, powerCurve(i.points)]));
  const tc = new Map<number, Curve>(infos.map((i) => [i.session, thrustCurve(i.points)]));
  for (const i of infos) if (!inputs.find((s) => s.id === i.session)?.rig) notes.push(`Session ${i.session} has no rig snapshot: taken as an open rotor with no duct mass.`);

  let common: [number, number] | null = base.thrust_range_N;
  if (!common) notes.push(`Baseline session ${base.session} has fewer than two operating points with thrust and power: nothing to compare against.`);
  else {
    base.compared = true;
    for (const s of infos.slice(1)) {
      const r = s.thrust_range_N;
      if (!r) {
        notes.push(`Session ${s.session} has fewer than two operating points with thrust and power: left out.`);
        continue;
      }
      const lo = Math.max(common[0], r[0]);
      const hi = Math.min(common[1], r[1]);
      if (!(hi > lo)) {
        const againstBase = Math.min(base.thrust_range_N![1], r[1]) > Math.max(base.thrust_range_N![0], r[0]);
        notes.push(
          againstBase
            ? `Session ${s.session} measured ${rangeText(r)}, which does not overlap the range common to the sessions before it (${rangeText(common)}): left out.`
            : `Session ${s.session} measured ${rangeText(r)}, baseline ${base.session} measured ${rangeText(base.thrust_range_N!)}: no thrust in common, left out.`,
        );
        continue;
      }
      s.compared = true;
      common = [lo, hi];
    }
  }
  const compared = infos.filter((i) => i.compared);
  if (compared.length < 2) common = null;
  if (common) {
    for (const s of compared) {
      const r = s.thrust_range_N!;
      const cut: string[] = [];
      if (r[0] < common[0] - 1e-12) cut.push(`below ${fmt(common[0])} N`);
      if (r[1] > common[1] + 1e-12) cut.push(`above ${fmt(common[1])} N`);
      if (cut.length) notes.push(`Session ${s.session} measured ${rangeText(r)}; its points ${cut.join(' and ')} are outside the common range and are not compared.`);
    }
  }

  const gridN = common ? grid(common[0], common[1], n) : [];
  const rows: ComparisonRow[] = [];
  const bp = pc.get(base.session)!;
  for (const s of compared.slice(1)) {
    const sp = pc.get(s.session)!;
    const st = tc.get(s.session)!;
    const ideal = idealSaving(s.sigma, base.sigma);
    let gainMissing = 0;
    for (const T of gridN) {
      const b = evaluate(bp, T);
      const v = evaluate(sp, T);
      if (!b || !v) continue; // cannot happen inside the common range; kept as a guard against rounding
      const bSd = effectiveSd(b);
      const vSd = effectiveSd(v);
      const ratio = v.y / b.y;
      const saving = 1 - ratio;
      const savingSd = ratio * Math.hypot(vSd / v.y, bSd / b.y);
      // Thrust at equal power: this session's thrust where its power equals the baseline's at T.
      const eq = evaluate(st, b.y);
      let gain: number | null = null;
      let gainSd: number | null = null;
      let netGain: number | null = null;
      if (eq) {
        gain = eq.y / T - 1;
        gainSd = Math.hypot(eq.slope * bSd, effectiveSd(eq)) / T;
        const baseNet = T - base.duct_mass_kg * G0;
        netGain = baseNet > 0 ? (eq.y - s.duct_mass_kg * G0 - baseNet) / baseNet : null;
      } else gainMissing++;
      rows.push({
        session: s.session,
        thrust_N: T,
        baseline_power_W: b.y,
        baseline_power_std_W: bSd,
        power_W: v.y,
        power_std_W: vSd,
        power_saving_pct: saving * 100,
        power_saving_std_pct: savingSd * 100,
        thrust_at_equal_power_N: eq ? eq.y : null,
        thrust_gain_pct: gain === null ? null : gain * 100,
        thrust_gain_std_pct: gainSd === null ? null : gainSd * 100,
        net_thrust_N: T - s.duct_mass_kg * G0,
        net_thrust_gain_pct: netGain === null ? null : netGain * 100,
        ideal_saving_pct: ideal * 100,
        duct_effectiveness: Math.abs(ideal) > 1e-9 ? saving / ideal : null,
        grams_per_watt: T / G0 / 1e-3 / v.y,
        baseline_grams_per_watt: T / G0 / 1e-3 / b.y,
      });
    }
    if (gainMissing > 0) {
      notes.push(
        `Session ${s.session}: thrust gain at equal power is missing at ${gainMissing} of ${gridN.length} grid thrusts, where the baseline's power there lies outside the power range session ${s.session} measured.`,
      );
    }
  }
  const comparison: Comparison = { baseline: base.session, sessions: infos, common_range_N: common, grid_N: gridN, rows, notes, verdict: null, g0: G0 };
  if (opts.vehicle) comparison.verdict = vehicleVerdict(infos, pc, tc, opts.vehicle);
  return comparison;
}
