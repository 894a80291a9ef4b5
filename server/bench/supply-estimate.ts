// The supply's resting voltage as the bench measures it, for the live prediction: a pack drains over a
// session, and a curve drawn for a charged pack (the model's default) runs ahead of a half-empty one.
//
// Each sample with voltage and current gives E = V + I R (the bus voltage plus the sag through the supply's
// internal resistance from the rig file), smoothed with a first-order filter of time constant TAU_S, so one
// noisy line or a throttle step does not redraw the curve. The estimate is offered for use when it has moved
// by at least MIN_STEP_V from the one in use and at most every MIN_INTERVAL_MS: the dashboard gets a new
// curve a few times a minute while a pack drains, not on every sample. The slow polarisation part of a
// lithium pack's sag is not in R, so under load E reads a little low; at rest it is the pack's own voltage.

export const TAU_S = 2;
export const MIN_STEP_V = 0.05;
export const MIN_INTERVAL_MS = 2000;

export class SupplyEstimate {
  private smoothed: number | null = null;
  private lastT: number | null = null;
  private used: number | null = null;
  private usedAt = -Infinity;

  /** internalResistance_ohm: the supply's, from the rig (0 for a stiff bench supply). */
  constructor(private readonly internalResistance_ohm: number) {
    if (!(Number.isFinite(internalResistance_ohm) && internalResistance_ohm >= 0)) {
      throw new RangeError('internalResistance_ohm: must be a non-negative number');
    }
  }

  /** The current estimate, V, or null before the first usable sample. */
  get value(): number | null {
    return this.smoothed;
  }

  /** The estimate last handed out by take(), or null. */
  get inUse(): number | null {
    return this.used;
  }

  /** Feed one sample (t in ms); samples without a positive voltage or without current are skipped. */
  add(t: number, voltage: number | null, current: number | null): void {
    if (voltage === null || current === null || !(voltage > 0) || !Number.isFinite(current) || !Number.isFinite(t)) return;
    const e = voltage + Math.max(0, current) * this.internalResistance_ohm;
    if (this.smoothed === null || this.lastT === null || t < this.lastT) {
      this.smoothed = e;
    } else {
      const a = 1 - Math.exp(-(t - this.lastT) / 1000 / TAU_S);
      this.smoothed += a * (e - this.smoothed);
    }
    this.lastT = t;
  }

  /** A new estimate to draw the prediction with, or null when the one in use is still good (or none yet). */
  take(t: number): number | null {
    const e = this.smoothed;
    if (e === null) return null;
    if (this.used !== null && (Math.abs(e - this.used) < MIN_STEP_V || t - this.usedAt < MIN_INTERVAL_MS)) return null;
    this.used = e;
    this.usedAt = t;
    return e;
  }

  /** Forget everything (a new mount, a reconnected board). */
  reset(): void {
    this.smoothed = null;
    this.lastT = null;
    this.used = null;
    this.usedAt = -Infinity;
  }
}
