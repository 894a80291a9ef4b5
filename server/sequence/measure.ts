// One measurement window -> one operating point: statistics of every channel, electrical power, grams per
// watt, the open-rotor figure of merit and, when a predictor is given, the prediction and the deviation.

import { POINT_CHANNELS, StatsAccumulator, type ChannelStats, type PointChannel } from '../bench/operating-point.js';
import type { Sample } from '../bench/telemetry.js';
import type { PlannedStep, PredictFn, RunPoint } from './types.js';

/** One gram-force in newtons (standard gravity, CGPM 1901). */
export const GRAM_FORCE_N = 9.80665e-3;
/** Sea-level standard-atmosphere density (ISO 2533), the default when no atmosphere is given. */
export const SEA_LEVEL_DENSITY = 1.225;
/** Below this electrical power a ratio to it is noise (an idling ESC draws a fraction of a watt). */
const MIN_POWER_W = 0.5;

/** Thrust in gram-force per electrical watt, or null when either is not meaningful. */
export function gramsPerWatt(thrust_N: number | null | undefined, power_W: number | null | undefined): number | null {
  if (thrust_N == null || power_W == null || !Number.isFinite(thrust_N) || !Number.isFinite(power_W)) return null;
  if (power_W < MIN_POWER_W) return null;
  return thrust_N / GRAM_FORCE_N / power_W;
}

/**
 * Open-rotor figure of merit FM = T^1.5 / (P sqrt(2 rho A)) from measured thrust and electrical power: a
 * system figure (motor and ESC losses included), so lower than the rotor's own. Null when the disk area is
 * unknown or thrust or power are not positive.
 */
export function figureOfMerit(thrust_N: number | null | undefined, power_W: number | null | undefined, rho: number, diskArea_m2: number | null): number | null {
  if (thrust_N == null || power_W == null || diskArea_m2 == null) return null;
  if (!(thrust_N > 0) || !(power_W >= MIN_POWER_W) || !(rho > 0) || !(diskArea_m2 > 0)) return null;
  return thrust_N ** 1.5 / (power_W * Math.sqrt(2 * rho * diskArea_m2));
}

export interface MeasureContext {
  airDensity_kg_m3: number;
  /** Rotor disk area (from the propeller diameter), or null when no rig is known. */
  diskArea_m2: number | null;
  predict: PredictFn | null;
}

export class WindowMeasurement {
  private readonly acc = new Map<PointChannel, StatsAccumulator>(POINT_CHANNELS.map((c) => [c, new StatsAccumulator()]));
  private first: number | null = null;
  private last: number | null = null;

  constructor(readonly startedAt: number) {}

  add(s: Sample): void {
    if (s.t < this.startedAt) return;
    if (this.first === null) this.first = s.t;
    this.last = s.t;
    for (const c of POINT_CHANNELS) {
      const v = s[c];
      if (v !== null && Number.isFinite(v)) this.acc.get(c)!.add(v);
    }
  }

  /** How many readings a channel has so far. */
  count(c: PointChannel): number {
    return this.acc.get(c)!.count;
  }

  finish(step: PlannedStep, endedAt: number, settled: boolean, settle_s: number, ctx: MeasureContext): RunPoint {
    const channels: Partial<Record<PointChannel, ChannelStats>> = {};
    for (const c of POINT_CHANNELS) {
      const r = this.acc.get(c)!.result();
      if (r) channels[c] = r;
    }
    const thrust = channels.thrust?.mean ?? null;
    const power = channels.power?.mean ?? null;
    const gpw = gramsPerWatt(thrust, power);
    let predicted: RunPoint['predicted'] = null;
    let deviation: number | null = null;
    let within: boolean | null | undefined;
    const voltage = channels.voltage?.mean;
    if (ctx.predict && voltage !== undefined) {
      const p = ctx.predict(step.throttle, voltage);
      if (p && Number.isFinite(p.thrust_N) && Number.isFinite(p.power_W) && Number.isFinite(p.grams_per_watt)) {
        predicted = { thrust_N: p.thrust_N, power_W: p.power_W, grams_per_watt: p.grams_per_watt };
        if (gpw !== null && p.grams_per_watt > 0) deviation = ((gpw - p.grams_per_watt) / p.grams_per_watt) * 100;
        const { grams_per_watt_lo: lo, grams_per_watt_hi: hi } = p;
        if (lo !== undefined && hi !== undefined && Number.isFinite(lo) && Number.isFinite(hi)) {
          predicted.grams_per_watt_lo = lo;
          predicted.grams_per_watt_hi = hi;
          within = gpw === null ? null : gpw >= lo && gpw <= hi;
        }
      }
    }
    return {
      index: step.index,
      throttle: step.throttle,
      t_start: this.startedAt,
      t_end: endedAt,
      settled,
      channels,
      grams_per_watt: gpw,
      figure_of_merit: figureOfMerit(thrust, power, ctx.airDensity_kg_m3, ctx.diskArea_m2),
      predicted,
      deviation_pct: deviation,
      ...(within !== undefined ? { within_band: within } : {}),
      settle_s,
      direction: step.direction,
      label: step.label,
      pass: step.pass,
    };
  }
}
