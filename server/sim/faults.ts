// Fault injection for the virtual bench: the failures a sweep or an interlock has to survive, each named,
// typed and documented, so a test says `bench.injectFault('stall', { duration_ms: 500 })` rather than
// poking at the physics. Every fault can be scheduled (after_ms) and most end by themselves (duration_ms);
// all can be ended early with the handle's clear().

import type { DropoutMode } from './sensors.js';

export const FAULT_KINDS = [
  'overcurrent',
  'stall',
  'prop_loss',
  'thrust_dropout',
  'garbled_lines',
  'unplug',
  'brownout',
  'reset',
  'ignore_heartbeat',
  'stand_disturbance',
  'zero_shift',
] as const;
export type InjectedFaultKind = (typeof FAULT_KINDS)[number];

interface Timing {
  /** Start this long after injection (device time); default at once. */
  after_ms?: number;
}
interface Lasting extends Timing {
  /** End by itself after this long; default: until clear(). */
  duration_ms?: number;
}

export interface FaultOptions {
  /**
   * A phase short in the ESC: extra bus current (default 60 A) flows whenever the output is above zero.
   * The firmware's own limit (sim.overcurrent_a) should cut the output and latch 'overcurrent'.
   */
  overcurrent: Lasting & { current_a?: number };
  /**
   * The rotor jams (something in the propeller's path): speed held at zero, so the motor current is limited
   * only by the winding and the supply; normally ends in an overcurrent trip if the throttle is up.
   */
  stall: Lasting;
  /**
   * The propeller is thrown: thrust and aerodynamic torque fall to `remaining_fraction` (default 0.1, a
   * hub stub); the rpm jumps and the current drops. Permanent until clear().
   */
  prop_loss: Timing & { remaining_fraction?: number };
  /**
   * The load cell stops delivering: 'silent' (default) drops the thrust channel from TEL (after
   * sim.sensor_timeout_ms the firmware latches 'sensor'); 'stuck' keeps repeating the last reading, which
   * only the host can notice.
   */
  thrust_dropout: Lasting & { mode?: DropoutMode };
  /**
   * Noisy cable: each line (d2h) or byte group (h2d) is corrupted with `probability` (default 0.2), so its
   * checksum fails. direction 'd2h' (default), 'h2d' or 'both'.
   */
  garbled_lines: Lasting & { probability?: number; direction?: 'd2h' | 'h2d' | 'both' };
  /**
   * USB cable pulled: nothing is sent or received (the firmware keeps running, so heartbeat loss latches).
   * In-process transports also report the close to the daemon and refuse to reopen until it ends.
   */
  unplug: Lasting;
  /**
   * The supply collapses to `voltage_v` (default 2.9 V per cell, or 60 % of a fixed supply) for
   * duration_ms (default 200 ms); the firmware latches 'brownout' after sim.brownout_ms below its floor.
   */
  brownout: Lasting & { voltage_v?: number };
  /**
   * Controller restart (watchdog or power glitch): silent for `down_ms` (default 50 ms) with the output
   * stopped, then boots again: fresh sequence numbers and device clock, no handshake, IDENT sent and fault
   * 'reset' latched until the host clears it.
   */
  reset: Timing & { down_ms?: number };
  /**
   * Buggy firmware that never acts on heartbeat loss (hbok stays 1, the output keeps running); for testing
   * the host's own defences. Until clear().
   */
  ignore_heartbeat: Timing;
  /**
   * Something disturbs the stand at rest: a draught on the propeller, a hand or a cable on the stand, a
   * machine shaking the bench. The load cell sees a swinging force of `amplitude_n` (default 0.3 N) at a few
   * hertz, rotor or not. A zero taken now would be wrong: the zero step must refuse.
   */
  stand_disturbance: Lasting & { amplitude_n?: number };
  /**
   * The load cell's zero creeps by `shift_n` (default 0.2 N) over `ramp_ms` (default 2000 ms), as a cell
   * warming up or a cable settling does: what the post-run zero reading measures as drift. It stays shifted
   * until clear() (or duration_ms).
   */
  zero_shift: Lasting & { shift_n?: number; ramp_ms?: number };
}

/** Handle to an injected fault. */
export interface InjectedFault {
  readonly kind: InjectedFaultKind;
  /** True between start and end. */
  readonly active: boolean;
  /** True once it has ended (by itself or by clear()). */
  readonly ended: boolean;
  clear(): void;
}
