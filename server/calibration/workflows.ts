// Calibration workflows over a connected bench: tare; span with one or several known masses (least squares,
// residuals and non-linearity, an implausible fit refused); current-sensor zero and a scale check against a
// reference reading; voltage scale against a multimeter; rpm pulses per revolution. Each result is added to
// the history and becomes the calibration in force.
//
// Readings are taken raw from the device's TEL frames (before the host calibration), so a new calibration is
// computed from what the sensor says, not from what the previous calibration made of it.

import type { FrameOf } from '../../firmware-protocol/src/messages.js';
import type { Calibration, CalibratedChannel, ChannelCal } from '../bench/calibration.js';
import type { BenchController } from '../bench/controller.js';
import type { DeviceLink } from '../link/link.js';
import { fitSpan, FitRefused, type SpanLimits } from './fit.js';
import type { CalibrationEntry, CalibrationHistory } from './history.js';

/** Standard gravity (CGPM 1901; ISO 80000-3), m/s^2. */
export const G0 = 9.80665;

export interface CalibrationTarget {
  link: DeviceLink;
  controller: BenchController;
  /** Makes a calibration the one in force (the daemon's telemetry pipeline). */
  setCalibration?: (c: Calibration) => void;
}

export interface Reading {
  mean: number;
  std: number;
  n: number;
}

export class CalibrationError extends Error {
  override name = 'CalibrationError';
}

const RAW_KEY: Record<CalibratedChannel, 'thrust' | 'v' | 'i' | 'torque' | 'rpm'> = { thrust: 'thrust', voltage: 'v', current: 'i', torque: 'torque', rpm: 'rpm' };

export class CalibrationWorkflows {
  constructor(
    private readonly bench: CalibrationTarget,
    readonly history: CalibrationHistory,
    private readonly opts: { settleMs?: number; measureSeconds?: number; spanLimits?: SpanLimits } = {},
  ) {}

  /** Averages the raw channel over `seconds` of telemetry (after a short settle). */
  async measure(channel: CalibratedChannel, seconds = this.opts.measureSeconds ?? 2): Promise<Reading> {
    const key = RAW_KEY[channel];
    await new Promise((r) => setTimeout(r, this.opts.settleMs ?? 300));
    const xs: number[] = [];
    const off = this.bench.link.on('frame', (f) => {
      if (f.tag !== 'TEL') return;
      const v = (f as FrameOf<'TEL'>).fields[key];
      if (v !== undefined) xs.push(v);
    });
    await new Promise((r) => setTimeout(r, seconds * 1000));
    off();
    if (xs.length < 3) throw new CalibrationError(`${channel}: only ${xs.length} readings in ${seconds} s; is the sensor fitted and reporting?`);
    const mean = xs.reduce((a, b) => a + b, 0) / xs.length;
    const std = Math.sqrt(xs.reduce((a, b) => a + (b - mean) ** 2, 0) / (xs.length - 1));
    return { mean, std, n: xs.length };
  }

  /** Zeroes the load cell in the firmware; the host thrust offset returns to zero. */
  async tare(): Promise<CalibrationEntry> {
    this.requireSafe('tare');
    await this.bench.controller.tare();
    await new Promise((r) => setTimeout(r, 500)); // the firmware averages its tare samples
    const cur = this.current('thrust');
    return this.record({ channel: 'thrust', kind: 'tare', result: { scale: cur.scale, offset: 0 } });
  }

  /**
   * Span with known masses (kg). `place(kg)` resolves once the operator has hung that mass (0 = nothing on the
   * cell) and let it settle. Needs at least two loads; 0 is added first when not given.
   */
  async span(massesKg: readonly number[], place: (kg: number) => Promise<void>): Promise<CalibrationEntry> {
    this.requireSafe('span');
    for (const m of massesKg) if (!Number.isFinite(m) || m < 0 || m > 100) throw new CalibrationError(`mass ${m} kg outside 0..100 kg`);
    const loads = massesKg.includes(0) ? [...massesKg] : [0, ...massesKg];
    if (new Set(loads).size < 2) throw new CalibrationError('a span needs at least one known mass besides the empty cell');
    const points: { raw: number; reference: number }[] = [];
    for (const kg of loads) {
      await place(kg);
      const r = await this.measure('thrust');
      points.push({ raw: r.mean, reference: kg * G0 });
    }
    let fit;
    try {
      fit = fitSpan(
        points.map((p) => ({ x: p.raw, y: p.reference })),
        this.opts.spanLimits,
      );
    } catch (err) {
      if (err instanceof FitRefused) throw new CalibrationError(`span refused: ${err.message}`);
      throw err;
    }
    return this.record({
      channel: 'thrust',
      kind: 'span',
      result: { scale: fit.slope, offset: fit.offset },
      points,
      residuals: fit.residuals,
      nonLinearityPct: fit.nonLinearityPct,
    });
  }

  /** Current-sensor zero: the reading with nothing drawing current (disarmed) becomes zero. */
  async currentZero(): Promise<CalibrationEntry> {
    this.requireSafe('current zero');
    const r = await this.measure('current');
    const cur = this.current('current');
    return this.record({ channel: 'current', kind: 'zero', result: { scale: cur.scale, offset: -cur.scale * r.mean }, points: [{ raw: r.mean, reference: 0 }] });
  }

  /** Scale of the current or voltage channel against a reference reading taken at the same time (a clamp meter, a multimeter). */
  async scaleAgainst(channel: 'current' | 'voltage', reference: number): Promise<CalibrationEntry> {
    if (!Number.isFinite(reference) || reference <= 0) throw new CalibrationError(`${channel} reference must be a positive number`);
    const r = await this.measure(channel);
    const cur = this.current(channel);
    if (Math.abs(r.mean) < 1e-6) throw new CalibrationError(`${channel} reads zero: nothing to scale against`);
    const scale = (reference - cur.offset) / r.mean;
    if (scale < 0.5 || scale > 2) throw new CalibrationError(`${channel} would need a scale of ${scale.toFixed(3)}: reading ${r.mean.toFixed(3)} against ${reference}; check the reference and the wiring`);
    return this.record({ channel, kind: 'scale', result: { scale, offset: cur.offset }, points: [{ raw: r.mean, reference }] });
  }

  /** rpm pulses per revolution: the firmware counts `firmwarePpr` pulses a turn; the pickup really gives `actualPpr`. */
  rpmPulses(actualPpr: number, firmwarePpr: number): CalibrationEntry {
    for (const [n, v] of [['actual', actualPpr], ['firmware', firmwarePpr]] as const) {
      if (!Number.isInteger(v) || v < 1 || v > 64) throw new CalibrationError(`${n} pulses per revolution must be a whole number 1..64`);
    }
    return this.record({ channel: 'rpm', kind: 'pulses_per_rev', result: { scale: firmwarePpr / actualPpr, offset: 0 }, note: `${actualPpr} pulses a revolution (firmware set for ${firmwarePpr})` });
  }

  private current(ch: CalibratedChannel): ChannelCal {
    return this.history.current()[ch];
  }

  private requireSafe(what: string): void {
    const st = this.bench.controller.state;
    if (st !== 'safe') throw new CalibrationError(`${what} only with the bench connected and disarmed (it is ${st})`);
  }

  private record(e: Omit<CalibrationEntry, 'at' | 'temperatureC'>): CalibrationEntry {
    const entry: CalibrationEntry = { at: new Date().toISOString(), temperatureC: this.lastTemperature, ...e };
    this.history.add(entry);
    this.bench.setCalibration?.(this.history.current());
    return entry;
  }

  private get lastTemperature(): number | null {
    return this.temperatureC;
  }

  /** Latest motor/ambient temperature, kept up to date by the caller (or by watch()). */
  temperatureC: number | null = null;

  /** Keeps temperatureC current from TEL frames; returns the unsubscribe. */
  watch(): () => void {
    return this.bench.link.on('frame', (f) => {
      if (f.tag === 'TEL' && (f as FrameOf<'TEL'>).fields.temp !== undefined) this.temperatureC = (f as FrameOf<'TEL'>).fields.temp!;
    });
  }
}
