// The host limits of a mount: each part may ask for limits of its own (a motor's temperature, a pack's cell
// floor, an ESC's current), and the bench has its own (the rig file's `limits` and the command line). Where
// two ask for the same limit, the stricter is in force: a part never loosens what another part or the
// operator set. "Stricter" is declared once per limit below; a limit with no direction (the vibration
// window, the cell count) takes the bench's value over the parts', and two parts that disagree on it are an
// error, since neither can be called safer.

import { LIMIT_KEYS, type Limits } from '../interlocks/limits.js';

type Direction = 'lower' | 'higher' | 'none';

/** Which way each limit gets stricter. Every limit key is listed (the test checks it against LIMIT_KEYS). */
export const STRICTER: Readonly<Record<keyof Limits, Direction>> = {
  max_current_a: 'lower',
  max_power_w: 'lower',
  max_thrust_n: 'lower',
  max_temp_c: 'lower',
  // A wider margin warns earlier.
  temp_warn_margin_c: 'higher',
  max_rpm: 'lower',
  tip_mach_warn: 'lower',
  tip_mach_trip: 'lower',
  cell_warn_v: 'higher',
  min_cell_v: 'higher',
  cells: 'none',
  vibration_std_n: 'lower',
  vibration_window_s: 'none',
  stale_ms: 'lower',
  thrust_stale_ms: 'lower',
  bad_line_burst: 'lower',
  zero_throttle_thrust_n: 'lower',
  deviation_warn_pct: 'lower',
  deviation_trip_pct: 'lower',
  max_slew_per_s: 'lower',
  max_throttle: 'lower',
  debounce_ms: 'lower',
};

export class LimitConflict extends Error {
  override readonly name = 'LimitConflict';
}

export interface LimitLayer {
  /** Who asks, for messages: "motor FM-2609 r2", "rig file". */
  from: string;
  limits: Readonly<Record<string, number>>;
}

/**
 * Combines the parts' limit layers, then the bench's (which wins where a limit has no direction). Returns the
 * raw overrides for parseLimits and, per key, who set the value in force.
 */
export function combineLimits(parts: readonly LimitLayer[], bench: Readonly<Record<string, number>>): { limits: Record<string, number>; source: Record<string, string> } {
  const out: Record<string, number> = {};
  const source: Record<string, string> = {};
  for (const layer of parts) {
    for (const [k, v] of Object.entries(layer.limits)) {
      const dir = STRICTER[k as keyof Limits];
      if (dir === undefined) throw new LimitConflict(`${layer.from}: unknown limit ${k} (known: ${LIMIT_KEYS.join(', ')})`);
      const had = out[k];
      if (had === undefined || (dir === 'lower' && v < had) || (dir === 'higher' && v > had)) {
        out[k] = v;
        source[k] = layer.from;
      } else if (dir === 'none' && v !== had) {
        throw new LimitConflict(`${k}: ${source[k]} asks for ${had}, ${layer.from} for ${v}; set it for the bench (rig file limits or --limits) or change one part`);
      }
    }
  }
  for (const [k, v] of Object.entries(bench)) {
    const dir = STRICTER[k as keyof Limits];
    const had = out[k];
    if (had === undefined || dir === 'none' || dir === undefined || (dir === 'lower' && v < had) || (dir === 'higher' && v > had)) {
      out[k] = v;
      source[k] = 'bench';
    }
  }
  return { limits: out, source };
}
