// Straight-line calibration fits: y = slope * x + offset by ordinary least squares, with the residuals, the
// standard errors of both parameters, and the non-linearity (largest residual as a percentage of the span of
// y, as load-cell datasheets state it). A fit whose residuals are implausible for a strain-gauge cell is
// refused rather than applied: a mass read off wrongly or a cell touching its stop must not become the
// calibration in force.

export interface FitPoint {
  /** Raw reading (what the channel reported, before host calibration). */
  x: number;
  /** Reference value (known force, multimeter reading). */
  y: number;
}

export interface LineFit {
  slope: number;
  offset: number;
  n: number;
  residuals: number[];
  /** Root-mean-square residual, in y units. */
  rms: number;
  /** Standard errors (null with fewer than three points: no degrees of freedom left). */
  slopeStd: number | null;
  offsetStd: number | null;
  /** Coefficient of determination. */
  r2: number;
  /** Largest |residual| over the span of y, percent. */
  nonLinearityPct: number;
}

export class FitRefused extends Error {
  override name = 'FitRefused';
}

/** Ordinary least squares. Throws FitRefused for fewer than two distinct x values. */
export function fitLine(points: readonly FitPoint[]): LineFit {
  const n = points.length;
  if (n < 2) throw new FitRefused('need at least two readings');
  for (const p of points) if (!Number.isFinite(p.x) || !Number.isFinite(p.y)) throw new FitRefused('readings must be finite numbers');
  const mx = points.reduce((a, p) => a + p.x, 0) / n;
  const my = points.reduce((a, p) => a + p.y, 0) / n;
  let sxx = 0;
  let sxy = 0;
  let syy = 0;
  for (const p of points) {
    sxx += (p.x - mx) ** 2;
    sxy += (p.x - mx) * (p.y - my);
    syy += (p.y - my) ** 2;
  }
  if (sxx <= 1e-18 * Math.max(1, mx * mx)) throw new FitRefused('the raw readings do not change between the references: is the load on the cell?');
  const slope = sxy / sxx;
  const offset = my - slope * mx;
  const residuals = points.map((p) => p.y - (slope * p.x + offset));
  const sse = residuals.reduce((a, r) => a + r * r, 0);
  const dof = n - 2;
  const s2 = dof > 0 ? sse / dof : null;
  const ys = points.map((p) => p.y);
  const span = Math.max(...ys) - Math.min(...ys);
  return {
    slope,
    offset,
    n,
    residuals,
    rms: Math.sqrt(sse / n),
    slopeStd: s2 === null ? null : Math.sqrt(s2 / sxx),
    offsetStd: s2 === null ? null : Math.sqrt(s2 * (1 / n + (mx * mx) / sxx)),
    r2: syy > 0 ? 1 - sse / syy : 1,
    nonLinearityPct: span > 0 ? (100 * Math.max(...residuals.map(Math.abs))) / span : 0,
  };
}

export interface SpanLimits {
  /** Largest acceptable non-linearity, % of span. A generic cell is 0.02-0.05 %; bench rigging adds some. */
  maxNonLinearityPct: number;
  /** Plausible gain range: a calibration that changes the reading by more than this factor is suspect. */
  minSlope: number;
  maxSlope: number;
}

export const DEFAULT_SPAN_LIMITS: SpanLimits = { maxNonLinearityPct: 1.0, minSlope: 0.5, maxSlope: 2.0 };

/** Fits a load-cell span and refuses an implausible one, saying why. */
export function fitSpan(points: readonly FitPoint[], limits: SpanLimits = DEFAULT_SPAN_LIMITS): LineFit {
  const f = fitLine(points);
  if (f.slope < limits.minSlope || f.slope > limits.maxSlope) {
    throw new FitRefused(`gain ${f.slope.toFixed(4)} is outside ${limits.minSlope}..${limits.maxSlope}: check the masses entered and that the cell hangs free`);
  }
  if (f.n >= 3 && f.nonLinearityPct > limits.maxNonLinearityPct) {
    throw new FitRefused(`non-linearity ${f.nonLinearityPct.toFixed(2)} % of span exceeds ${limits.maxNonLinearityPct} %: a reading is off (mass touching, cable pulling, cell at its stop)`);
  }
  return f;
}
