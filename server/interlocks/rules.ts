// The host interlock rules. Each is a small named object: what it watches, why (the reason text shown to the
// operator), and a check that returns a finding (warn or trip, with the value and the limit) or null. Sample
// rules run on every calibrated sample; tick rules run on a timer, for what is noticed by absence (no
// telemetry, a silent load cell) or by rate (bad lines per second).

import type { Sample } from '../bench/telemetry.js';
import type { Limits } from './limits.js';

export type Level = 'warn' | 'trip';

export interface Finding {
  level: Level;
  value: number;
  limit: number;
  detail: string;
}

/** What the engine knows when a rule runs. Derived values are computed once per sample by the engine. */
export interface RuleContext {
  limits: Limits;
  /** Host time now, ms (performance.now() base). */
  now: number;
  /** The bench may be energised (armed or running). */
  mayTurn: boolean;
  /** Device output, as last reported. */
  output: number;
  /** Since when (ms) the output has been zero, or null while it is not. */
  outputZeroSince: number | null;
  /** How long the output has held within half a percent (ms): transients of a step are not vibration. */
  outputSteadyForMs: number;
  /** Propeller diameter from the rig, when known (m). */
  diameterM: number | null;
  /** Speed of sound at the atmosphere in use (m/s). */
  speedOfSound: number;
  /** Cells in series: from the rig, the limits, or inferred; null until known. */
  cells: number | null;
  /** Thrust standard deviation about its linear trend over the vibration window, or null (too few points). */
  thrustDetrendedStd: number | null;
  /** Steady measured and predicted grams per watt, when a prediction exists and the bench is steady. */
  gpwMeasured: number | null;
  gpwPredicted: number | null;
  /** Half-width of the prediction's uncertainty band there, % of the prediction; null when it carries none. */
  gpwBandPct: number | null;
  /** Time of the last telemetry frame and of the last thrust reading (ms, performance.now() base). */
  lastFrameAt: number | null;
  lastThrustAt: number | null;
  /** Bad lines counted in the last second. */
  badLinesLastSecond: number;
  /**
   * Staleness in force (ms): the stale_ms and thrust_stale_ms limits, lengthened to STALE_PERIODS periods of the
   * device's fastest declared channel and of its thrust channel (host-rules.ts), so a board with slow channels
   * that sends only when it has a sample is not taken for a silent one.
   */
  staleFrameMs: number;
  staleThrustMs: number;
}

/**
 * A rule's answer: a finding, OK (looked and found nothing wrong), or null (nothing to look at in this
 * sample, e.g. the thrust channel was not sampled in this frame). Only OK clears a pending debounce: an
 * 80 Hz thrust reading between 500 Hz electrical frames must not restart the clock on every frame.
 */
export const OK = 'ok' as const;
export type Verdict = Finding | typeof OK | null;

export interface Rule {
  /** Stable identifier: appears in trip records, sessions and `run --json`. */
  readonly name: string;
  /** For people: what the rule protects against. */
  readonly reason: string;
  sample?(s: Sample, c: RuleContext): Verdict;
  tick?(c: RuleContext): Verdict;
}

const fmt = (x: number, d = 1) => x.toFixed(d);

/**
 * Spread of the live thrust-per-watt figure itself on a steady point, % at two standard uncertainties: thrust
 * and power each smoothed over half a second still carry the load cell's vibration noise and the ESC's current
 * ripple (about 1.5 % one sigma on the virtual bench at mid throttle). Added to the prediction's band in
 * quadrature, so a calibrated, narrow band does not warn on the measurement's own noise.
 */
export const LIVE_GPW_SPREAD_PCT = 3;

/** A simple ceiling on one channel, tripping above it and warning at a fraction of it. */
function ceiling(name: string, reason: string, channel: 'current' | 'power' | 'thrust' | 'rpm', limit: (l: Limits) => number, unit: string, warnAt = 0.9): Rule {
  return {
    name,
    reason,
    sample(s, c) {
      const v = s[channel];
      if (v === null) return null;
      const lim = limit(c.limits);
      const mag = Math.abs(v);
      if (mag > lim) return { level: 'trip', value: v, limit: lim, detail: `${channel} ${fmt(mag)} ${unit} above ${fmt(lim)} ${unit}` };
      if (mag > warnAt * lim) return { level: 'warn', value: v, limit: lim, detail: `${channel} ${fmt(mag)} ${unit} near the limit ${fmt(lim)} ${unit}` };
      return OK;
    },
  };
}

export const RULES: readonly Rule[] = [
  ceiling('max_current', 'bus current beyond what the ESC, motor and wiring are rated for', 'current', (l) => l.max_current_a, 'A'),
  ceiling('max_power', 'electrical power beyond the rig rating', 'power', (l) => l.max_power_w, 'W'),
  ceiling('max_thrust', 'thrust beyond what the stand and load cell are rated for', 'thrust', (l) => l.max_thrust_n, 'N'),
  ceiling('max_rpm', 'shaft speed beyond the propeller or motor rating', 'rpm', (l) => l.max_rpm, 'rpm'),
  {
    name: 'max_temp',
    reason: 'motor overheating: magnets and winding insulation are damaged past their rating',
    sample(s, c) {
      if (s.temp === null) return null;
      const lim = c.limits.max_temp_c;
      if (s.temp > lim) return { level: 'trip', value: s.temp, limit: lim, detail: `motor ${fmt(s.temp)} °C above ${fmt(lim)} °C` };
      if (s.temp > lim - c.limits.temp_warn_margin_c) return { level: 'warn', value: s.temp, limit: lim, detail: `motor ${fmt(s.temp)} °C within ${fmt(c.limits.temp_warn_margin_c)} °C of its limit` };
      return OK;
    },
  },
  {
    name: 'tip_mach',
    reason: 'blade tips approaching the speed of sound: noise, loss and blade stress rise steeply',
    sample(s, c) {
      if (s.rpm === null || c.diameterM === null) return null;
      const tip = (s.rpm / 60) * Math.PI * c.diameterM;
      const mach = tip / c.speedOfSound;
      if (mach > c.limits.tip_mach_trip) return { level: 'trip', value: mach, limit: c.limits.tip_mach_trip, detail: `tip Mach ${fmt(mach, 2)} (${fmt(tip, 0)} m/s) above ${fmt(c.limits.tip_mach_trip, 2)}` };
      if (mach > c.limits.tip_mach_warn) return { level: 'warn', value: mach, limit: c.limits.tip_mach_trip, detail: `tip Mach ${fmt(mach, 2)} rising (warn at ${fmt(c.limits.tip_mach_warn, 2)})` };
      return OK;
    },
  },
  {
    name: 'min_pack_voltage',
    reason: 'lithium cells below their minimum voltage are damaged and can later catch fire',
    sample(s, c) {
      if (s.voltage === null || c.cells === null || !c.mayTurn) return null;
      const trip = c.limits.min_cell_v * c.cells;
      const warn = c.limits.cell_warn_v * c.cells;
      if (s.voltage < trip) return { level: 'trip', value: s.voltage, limit: trip, detail: `pack ${fmt(s.voltage, 2)} V below ${fmt(trip, 2)} V (${c.cells} cells × ${c.limits.min_cell_v} V)` };
      if (s.voltage < warn) return { level: 'warn', value: s.voltage, limit: trip, detail: `pack ${fmt(s.voltage, 2)} V: ${fmt(s.voltage / c.cells, 2)} V per cell` };
      return OK;
    },
  },
  {
    name: 'vibration',
    reason: 'thrust fluctuating as from a damaged, unbalanced or loose propeller',
    sample(s, c) {
      if (s.thrust === null || c.thrustDetrendedStd === null || !c.mayTurn) return null;
      if (c.outputSteadyForMs < c.limits.vibration_window_s * 1000 + 500) return null;
      const v = c.thrustDetrendedStd;
      const lim = c.limits.vibration_std_n;
      if (v > lim) return { level: 'trip', value: v, limit: lim, detail: `thrust fluctuates ±${fmt(v, 2)} N (limit ±${fmt(lim, 2)} N)` };
      if (v > 0.7 * lim) return { level: 'warn', value: v, limit: lim, detail: `thrust fluctuation ±${fmt(v, 2)} N rising` };
      return OK;
    },
  },
  {
    name: 'thrust_at_zero_throttle',
    reason: 'thrust read while the output is zero: a loose rig, a fouled load cell, or a tare that no longer holds',
    sample(s, c) {
      if (s.thrust === null || c.outputZeroSince === null || c.now - c.outputZeroSince < 1500) return null;
      const lim = c.limits.zero_throttle_thrust_n;
      if (Math.abs(s.thrust) <= lim) return OK;
      // Disarmed, nothing to cut: tell the operator before they arm.
      return { level: c.mayTurn ? 'trip' : 'warn', value: s.thrust, limit: lim, detail: `${fmt(s.thrust, 2)} N with the output at zero (limit ${fmt(lim, 2)} N)` };
    },
  },
  {
    name: 'prediction_deviation',
    reason: 'measured efficiency far from the model: a wrong rig description, a damaged propeller or a sensor fault',
    sample(_s, c) {
      if (c.gpwMeasured === null || c.gpwPredicted === null || c.gpwPredicted <= 0 || !c.mayTurn) return null;
      const dev = (100 * (c.gpwMeasured - c.gpwPredicted)) / c.gpwPredicted;
      const mag = Math.abs(dev);
      // Judged against the prediction's own band where it has one (widened by the live figure's own spread,
      // LIVE_GPW_SPREAD_PCT, in quadrature): outside it warns; beyond the trip limit trips, but never inside
      // the band (a deviation the prediction itself allows is not a fault). A prediction without a band falls
      // back to the fixed warning percentage.
      const band = c.gpwBandPct != null && Number.isFinite(c.gpwBandPct) ? Math.hypot(c.gpwBandPct, LIVE_GPW_SPREAD_PCT) : null;
      const trip = band !== null ? Math.max(c.limits.deviation_trip_pct, band) : c.limits.deviation_trip_pct;
      const warn = band ?? c.limits.deviation_warn_pct;
      if (mag > trip) return { level: 'trip', value: dev, limit: trip, detail: `grams per watt ${fmt(dev)} % from the prediction (trip at ±${fmt(trip)} %)` };
      if (mag > warn) return { level: 'warn', value: dev, limit: warn, detail: band !== null ? `grams per watt ${fmt(dev)} % from the prediction, outside its band of ±${fmt(warn)} %` : `grams per watt ${fmt(dev)} % from the prediction` };
      return OK;
    },
  },
  {
    name: 'stale_telemetry',
    reason: 'no telemetry: the host is flying blind (cable, firmware or driver trouble)',
    tick(c) {
      if (!c.mayTurn || c.lastFrameAt === null) return null;
      const age = c.now - c.lastFrameAt;
      return age > c.staleFrameMs ? { level: 'trip', value: age, limit: c.staleFrameMs, detail: `no telemetry for ${fmt(age, 0)} ms` } : OK;
    },
  },
  {
    name: 'thrust_sensor_silent',
    reason: 'the load cell stopped reporting: thrust limits cannot be enforced',
    tick(c) {
      if (!c.mayTurn || c.lastThrustAt === null) return null;
      const age = c.now - c.lastThrustAt;
      return age > c.staleThrustMs ? { level: 'trip', value: age, limit: c.staleThrustMs, detail: `no thrust reading for ${fmt(age, 0)} ms` } : OK;
    },
  },
  {
    name: 'bad_line_burst',
    reason: 'a burst of corrupted lines: electrical noise or a failing cable; readings cannot be trusted',
    tick(c) {
      const n = c.badLinesLastSecond;
      const lim = c.limits.bad_line_burst;
      if (n <= lim) return OK;
      return { level: c.mayTurn ? 'trip' : 'warn', value: n, limit: lim, detail: `${n} bad lines in the last second (limit ${lim})` };
    },
  },
];

/** The throttle slew limit is enforced where throttle is commanded (BenchController), not on samples. */
export const SLEW_RULE = {
  name: 'throttle_slew',
  reason: 'a sudden throttle step shocks the stand, the propeller and the supply, and hides transients',
} as const;

export function ruleByName(name: string): Rule | undefined {
  return RULES.find((r) => r.name === name);
}
