// The virtual bench's sensors: what the firmware's converters would read from the truth, with their own
// rates, lag, noise, gain errors and offsets. The load cell is modelled as a bridge ADC that averages the
// (mechanically lagged) force over each conversion, so a 10 samples/s converter both smooths and delays
// thrust; the electrical channels are instantaneous samples. Sample times are the converters' own, so the
// firmware frames whatever became ready since its last telemetry frame.

import type { Channel } from '../../firmware-protocol/src/messages.js';
import type { Prng } from './prng.js';
import type { SimConstants } from './sim-constants.js';
import type { TruthState } from './truth.js';

export interface ChannelRate {
  channel: Channel;
  rateHz: number;
}

/** How a dropped-out load cell behaves: 'silent' stops answering, 'stuck' keeps repeating the last value. */
export type DropoutMode = 'silent' | 'stuck';

export interface SensorSample {
  channel: Channel;
  value: number;
}

interface Schedule {
  channel: Channel;
  periodUs: number;
  nextUs: number;
}

export class SensorBank {
  readonly rates: readonly ChannelRate[];
  private readonly schedules: Schedule[];
  /** Load-cell force after the stand's mechanical lag, and its running integral over a conversion. */
  private lagged = 0;
  private integral = 0;
  private integralTime = 0;
  private lastThrust = 0;
  private driftN = 0;
  /** Thermistor on the motor case: follows the case temperature a little late. */
  private thermistorC: number | null = null;
  dropout: DropoutMode | null = null;
  /**
   * Force of a calibration mass hung on the load cell (N, acting along the thrust axis through a pulley or
   * with the stand turned upright), as an operator does to span the cell. The cell cannot tell it from thrust.
   */
  externalLoadN = 0;
  /** Amplitude of a disturbance on the stand (fault 'stand_disturbance'), N: a force swinging at a few hertz. */
  disturbanceN = 0;
  /** Zero creep of the cell (fault 'zero_shift'): it moves towards `zeroShiftTargetN` at `zeroShiftRateNPerS`. */
  zeroShiftTargetN = 0;
  zeroShiftRateNPerS = 0;
  private zeroShiftN = 0;

  constructor(
    private readonly k: SimConstants,
    private readonly rng: Prng,
  ) {
    const list: ChannelRate[] = [];
    const add = (channel: Channel, rateHz: number): void => {
      if (rateHz > 0) list.push({ channel, rateHz });
    };
    add('thrust', k.thrust_rate_hz);
    add('voltage', k.voltage_rate_hz);
    add('current', k.current_rate_hz);
    add('rpm', k.rpm_rate_hz);
    add('temp', k.temp_rate_hz);
    add('torque', k.torque_rate_hz);
    this.rates = list;
    this.schedules = list.map((r) => ({ channel: r.channel, periodUs: 1e6 / r.rateHz, nextUs: 1e6 / r.rateHz }));
  }

  /** Restarts the converters' schedules (the controller rebooted at `nowUs`). */
  restart(nowUs: number): void {
    for (const s of this.schedules) s.nextUs = nowUs + s.periodUs;
    this.integral = 0;
    this.integralTime = 0;
  }

  /** Tracks continuous quantities over one tick of dt seconds and returns the samples that became ready by `nowUs`. */
  tick(nowUs: number, dt: number, truth: Readonly<TruthState>): SensorSample[] {
    const k = this.k;
    const lagS = k.thrust_lag_ms / 1000;
    const ts = nowUs / 1e6;
    // Two incommensurate tones: a swing no window of a second averages away.
    const disturbance = this.disturbanceN > 0 ? this.disturbanceN * (0.8 * Math.sin(2 * Math.PI * 1.7 * ts) + 0.4 * Math.sin(2 * Math.PI * 5.3 * ts + 1)) : 0;
    const force = truth.thrustN + this.externalLoadN + disturbance;
    const dz = this.zeroShiftTargetN - this.zeroShiftN;
    this.zeroShiftN += Math.sign(dz) * Math.min(Math.abs(dz), this.zeroShiftRateNPerS * dt);
    this.lagged += (force - this.lagged) * (lagS > 0 ? Math.min(1, dt / lagS) : 1);
    this.integral += this.lagged * dt;
    this.integralTime += dt;
    this.driftN += (k.thrust_drift_n_per_min / 60) * dt;
    const thermTau = 3;
    if (this.thermistorC === null) this.thermistorC = truth.caseC;
    this.thermistorC += (truth.caseC - this.thermistorC) * Math.min(1, dt / thermTau);

    const ready: SensorSample[] = [];
    for (const s of this.schedules) {
      if (nowUs < s.nextUs) continue;
      // A late tick (large step) still yields one sample per channel: the converter holds only its latest.
      while (s.nextUs <= nowUs) s.nextUs += s.periodUs;
      const v = this.read(s.channel, truth);
      if (v !== null) ready.push({ channel: s.channel, value: v });
    }
    return ready;
  }

  private read(ch: Channel, t: Readonly<TruthState>): number | null {
    const k = this.k;
    const g = (): number => this.rng.gauss();
    switch (ch) {
      case 'thrust': {
        const avg = this.integralTime > 0 ? this.integral / this.integralTime : this.lagged;
        this.integral = 0;
        this.integralTime = 0;
        if (this.dropout === 'silent') return null;
        if (this.dropout === 'stuck') return this.lastThrust;
        // The slower conversion averages more: noise density falls with the square root of the rate.
        const rateNoise = k.thrust_noise_n * Math.sqrt(k.thrust_rate_hz / 80);
        const vib = k.thrust_vibration_n * (t.rpm / 10000) ** 2;
        let f = avg * k.thrust_scale + k.thrust_offset_n + this.driftN + this.zeroShiftN + g() * Math.hypot(rateNoise, vib);
        if (k.thrust_resolution_n > 0) f = Math.round(f / k.thrust_resolution_n) * k.thrust_resolution_n;
        this.lastThrust = f;
        return f;
      }
      case 'voltage':
        return t.busVoltageV * k.voltage_scale + k.voltage_offset_v + g() * k.voltage_noise_v;
      case 'current':
        // Hall sensor: offset, gain error, noise, and ripple that grows with the current.
        return t.busCurrentA * k.current_scale + k.current_offset_a + g() * Math.hypot(k.current_noise_a, 0.01 * t.busCurrentA);
      case 'rpm': {
        if (t.rpm < 60) return 0;
        return Math.max(0, t.rpm * (1 + g() * k.rpm_noise_fraction));
      }
      case 'temp':
        return (this.thermistorC ?? t.caseC) + k.temp_offset_c + g() * k.temp_noise_c;
      case 'torque':
        return t.torqueNm + g() * k.torque_noise_nm;
    }
  }
}
