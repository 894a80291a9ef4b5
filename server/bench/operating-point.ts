// An operating point: the settled, averaged readings at one throttle step of a sweep. Produced by the
// sequence runner, stored with the session, compared across sessions.

export type PointChannel = 'thrust' | 'voltage' | 'current' | 'power' | 'rpm' | 'temp' | 'torque';
export const POINT_CHANNELS: readonly PointChannel[] = ['thrust', 'voltage', 'current', 'power', 'rpm', 'temp', 'torque'];

export interface ChannelStats {
  mean: number;
  /** Sample standard deviation (n - 1). */
  std: number;
  n: number;
  min: number;
  max: number;
}

export interface OperatingPoint {
  /** Step number in the sequence, from 0. */
  index: number;
  /** Throttle commanded during the measurement window (0..1). */
  throttle: number;
  /** Host times (ms since epoch) of the measurement window. */
  t_start: number;
  t_end: number;
  /** Whether the settle criterion was met (false: the maximum wait ran out). */
  settled: boolean;
  channels: Partial<Record<PointChannel, ChannelStats>>;
  /** Thrust in gram-force per electrical watt. */
  grams_per_watt: number | null;
  /** Open-rotor figure of merit from thrust and electrical power at the atmosphere in use (a system figure, motor losses included). */
  figure_of_merit: number | null;
  /** Model prediction at this throttle, when a rig is known. */
  predicted: { thrust_N: number; power_W: number; grams_per_watt: number; grams_per_watt_lo?: number; grams_per_watt_hi?: number } | null;
  /** Measured grams per watt against predicted, in %. */
  deviation_pct: number | null;
  /** Whether the measured grams per watt lies inside the prediction's uncertainty band (absent: no band). */
  within_band?: boolean | null;
}

/** Welford accumulator: one pass, numerically stable, no sample array kept. */
export class StatsAccumulator {
  private n = 0;
  private mean = 0;
  private m2 = 0;
  private min = Infinity;
  private max = -Infinity;

  add(x: number): void {
    this.n++;
    const d = x - this.mean;
    this.mean += d / this.n;
    this.m2 += d * (x - this.mean);
    if (x < this.min) this.min = x;
    if (x > this.max) this.max = x;
  }

  get count(): number {
    return this.n;
  }

  result(): ChannelStats | null {
    if (this.n === 0) return null;
    return { mean: this.mean, std: this.n > 1 ? Math.sqrt(this.m2 / (this.n - 1)) : 0, n: this.n, min: this.min, max: this.max };
  }
}
