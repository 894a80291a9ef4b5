// Host-side channel calibration: value = scale * raw + offset, per channel. The firmware reports engineering
// units already; this corrects them against reference readings (known masses, a multimeter) without
// reflashing. Identity until a calibration is made.

export interface ChannelCal {
  scale: number;
  offset: number;
}

export interface Calibration {
  thrust: ChannelCal;
  voltage: ChannelCal;
  current: ChannelCal;
  torque: ChannelCal;
  /** Pulses-per-revolution correction of the rpm channel (offset unused). */
  rpm: ChannelCal;
}

export const CALIBRATED_CHANNELS = ['thrust', 'voltage', 'current', 'torque', 'rpm'] as const;
export type CalibratedChannel = (typeof CALIBRATED_CHANNELS)[number];

export function identityCalibration(): Calibration {
  const id = (): ChannelCal => ({ scale: 1, offset: 0 });
  return { thrust: id(), voltage: id(), current: id(), torque: id(), rpm: id() };
}

export function applyCalibration(c: ChannelCal, raw: number): number {
  return c.scale * raw + c.offset;
}
