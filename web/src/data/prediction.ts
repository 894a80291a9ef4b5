// The hook for the model overlay on the thrust-per-watt chart. When the daemon puts a prediction into
// snapshot.extras (or an 'extras' message) as
//   extras.prediction = { thrust_N: number[], grams_per_watt: number[], ideal_open_gpw: number[],
//                         ideal_ducted_gpw: (number | null)[] }
// (all arrays the same length, thrust ascending, thrust-per-watt in gram-force per watt; null where the
// ducted ideal does not apply), the chart draws the three as lines over the measured points. Anything else
// under that key is ignored rather than drawn wrong. With band_lo_gpw and band_hi_gpw (the same length; null
// where the band is unbounded, below the ESC's start) and band_source { kind: 'prior' | 'fit', text }, the
// chart shades the prediction's uncertainty band.

export interface Prediction {
  thrustN: number[];
  gramsPerWatt: (number | null)[];
  idealOpen: (number | null)[];
  idealDucted: (number | null)[];
  /** The uncertainty band's edges, or null from a daemon that sends none. */
  bandLo: (number | null)[] | null;
  bandHi: (number | null)[] | null;
  band: { kind: 'prior' | 'fit'; text: string } | null;
}

function numbers(v: unknown, n: number): (number | null)[] | null {
  if (!Array.isArray(v) || v.length !== n) return null;
  return v.map((x) => (typeof x === 'number' && Number.isFinite(x) ? x : null));
}

export function readPrediction(extras: Readonly<Record<string, unknown>> | null | undefined): Prediction | null {
  const p = extras?.prediction as Record<string, unknown> | undefined;
  if (!p || typeof p !== 'object' || !Array.isArray(p.thrust_N)) return null;
  const n = p.thrust_N.length;
  if (n === 0) return null;
  const thrust = numbers(p.thrust_N, n);
  const gpw = numbers(p.grams_per_watt, n);
  const open = numbers(p.ideal_open_gpw, n) ?? new Array<null>(n).fill(null);
  const ducted = numbers(p.ideal_ducted_gpw, n) ?? new Array<null>(n).fill(null);
  if (!thrust || !gpw || thrust.some((x) => x === null)) return null;
  const lo = numbers(p.band_lo_gpw, n);
  const hi = numbers(p.band_hi_gpw, n);
  const src = p.band_source as { kind?: unknown; text?: unknown } | undefined;
  const band: Prediction['band'] = lo && hi && src && (src.kind === 'prior' || src.kind === 'fit') ? { kind: src.kind as 'prior' | 'fit', text: typeof src.text === 'string' ? src.text : '' } : null;
  return { thrustN: thrust as number[], gramsPerWatt: gpw, idealOpen: open, idealDucted: ducted, bandLo: band ? lo : null, bandHi: band ? hi : null, band };
}
