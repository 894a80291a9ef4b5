// Decoded TEL frames -> calibrated samples: device time unwrapped, calibration applied, electrical power
// derived. The sample is then offered to the interlocks, the store and the broadcast, in that order.

import type { FrameOf } from '../../firmware-protocol/src/messages.js';
import type { SampleChannel } from '../api/messages.js';
import { applyCalibration, type Calibration, identityCalibration } from './calibration.js';

export interface Sample {
  /** Host time, ms since the Unix epoch. */
  t: number;
  /** Device time in seconds since its boot, unwrapped. */
  dt: number;
  thrust: number | null;
  voltage: number | null;
  current: number | null;
  power: number | null;
  rpm: number | null;
  temp: number | null;
  torque: number | null;
  out: number | null;
}

const WRAP = 2 ** 32;

/** Unwraps the device's 32-bit microsecond clock (it wraps every 71.6 minutes). */
export class DeviceClock {
  private last: number | null = null;
  private epochs = 0;

  /** Seconds since the device booted (monotonic across wraps). */
  unwrap(us: number): number {
    if (this.last !== null && us < this.last && this.last - us > WRAP / 2) this.epochs++;
    this.last = us;
    return (this.epochs * WRAP + us) / 1e6;
  }

  reset(): void {
    this.last = null;
    this.epochs = 0;
  }
}

export class TelemetryPipeline {
  readonly clock = new DeviceClock();
  calibration: Calibration = identityCalibration();
  /** The zero taken before a run (zero-service.ts), N, off every calibrated thrust reading. */
  thrustZero = 0;
  /** Last voltage and current, held so power can be formed when a frame carries only one of them. */
  private lastV: number | null = null;
  private lastI: number | null = null;

  reset(): void {
    this.clock.reset();
    this.lastV = this.lastI = null;
  }

  toSample(f: FrameOf<'TEL'>, now: number): Sample {
    const x = f.fields;
    const c = this.calibration;
    const voltage = x.v === undefined ? null : applyCalibration(c.voltage, x.v);
    const current = x.i === undefined ? null : applyCalibration(c.current, x.i);
    if (voltage !== null) this.lastV = voltage;
    if (current !== null) this.lastI = current;
    const power = (voltage !== null || current !== null) && this.lastV !== null && this.lastI !== null ? this.lastV * this.lastI : null;
    return {
      t: now,
      dt: this.clock.unwrap(x.t),
      thrust: x.thrust === undefined ? null : applyCalibration(c.thrust, x.thrust) - this.thrustZero,
      voltage,
      current,
      power,
      rpm: x.rpm === undefined ? null : applyCalibration(c.rpm, x.rpm),
      temp: x.temp === undefined ? null : x.temp,
      torque: x.torque === undefined ? null : applyCalibration(c.torque, x.torque),
      out: x.out === undefined ? null : x.out,
    };
  }
}

export const SAMPLE_KEYS: readonly SampleChannel[] = ['thrust', 'voltage', 'current', 'power', 'rpm', 'temp', 'torque', 'out'];
