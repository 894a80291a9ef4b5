// Small numeric helpers for the model: a bracketed scalar root finder and dense linear algebra for the
// least-squares fit. Written here rather than pulled from a library because the model must stay a pure,
// dependency-free module that also runs in the browser.

/**
 * Root of f on [lo, hi] where f(lo) and f(hi) have opposite signs (or one is zero).
 * Illinois-modified regula falsi: converges superlinearly on the smooth, monotone residuals the model
 * produces, yet never leaves the bracket, so a bad starting guess cannot send the motor solve to a
 * negative speed. Returns NaN when the bracket does not hold a sign change.
 */
export function solveBracketed(
  f: (x: number) => number,
  lo: number,
  hi: number,
  tolX = 1e-10,
  maxIter = 100,
): number {
  let a = lo;
  let b = hi;
  let fa = f(a);
  let fb = f(b);
  if (fa === 0) return a;
  if (fb === 0) return b;
  if (!(fa * fb < 0)) return Number.NaN;
  let side = 0;
  for (let k = 0; k < maxIter; k++) {
    const c = (a * fb - b * fa) / (fb - fa);
    const fc = f(c);
    if (fc === 0 || Math.abs(b - a) < tolX * (1 + Math.abs(c))) return c;
    if (fc * fb > 0) {
      b = c;
      fb = fc;
      if (side === -1) fa /= 2;
      side = -1;
    } else {
      a = c;
      fa = fc;
      if (side === 1) fb /= 2;
      side = 1;
    }
  }
  return (a * fb - b * fa) / (fb - fa);
}

/** Linear interpolation in a table with increasing xs; clamps outside the table. */
export function interp1(xs: readonly number[], ys: readonly number[], x: number): number {
  const n = xs.length;
  if (n === 1 || x <= xs[0]) return ys[0];
  if (x >= xs[n - 1]) return ys[n - 1];
  let i = 1;
  while (xs[i] < x) i++;
  const t = (x - xs[i - 1]) / (xs[i] - xs[i - 1]);
  return ys[i - 1] + t * (ys[i] - ys[i - 1]);
}

/**
 * Inverse of a small symmetric positive (semi-)definite matrix by Gauss-Jordan elimination with partial
 * pivoting. Returns null when a pivot falls below `relTol` times the largest diagonal entry, which is how
 * the fit detects parameters that the data cannot separate.
 */
export function invertSymmetric(m: readonly (readonly number[])[], relTol = 1e-12): number[][] | null {
  const n = m.length;
  const a = m.map((row, i) => [...row, ...Array.from({ length: n }, (_, j) => (i === j ? 1 : 0))]);
  let maxDiag = 0;
  for (let i = 0; i < n; i++) maxDiag = Math.max(maxDiag, Math.abs(m[i][i]));
  if (maxDiag === 0 || !Number.isFinite(maxDiag)) return null;
  for (let col = 0; col < n; col++) {
    let piv = col;
    for (let r = col + 1; r < n; r++) if (Math.abs(a[r][col]) > Math.abs(a[piv][col])) piv = r;
    if (Math.abs(a[piv][col]) <= relTol * maxDiag) return null;
    [a[col], a[piv]] = [a[piv], a[col]];
    const p = a[col][col];
    for (let j = 0; j < 2 * n; j++) a[col][j] /= p;
    for (let r = 0; r < n; r++) {
      if (r === col) continue;
      const factor = a[r][col];
      if (factor === 0) continue;
      for (let j = 0; j < 2 * n; j++) a[r][j] -= factor * a[col][j];
    }
  }
  return a.map((row) => row.slice(n));
}

/** Solve the small linear system A x = b (A square) by Gaussian elimination; null if singular. */
export function solveLinear(A: readonly (readonly number[])[], b: readonly number[]): number[] | null {
  const n = b.length;
  const a = A.map((row, i) => [...row, b[i]]);
  for (let col = 0; col < n; col++) {
    let piv = col;
    for (let r = col + 1; r < n; r++) if (Math.abs(a[r][col]) > Math.abs(a[piv][col])) piv = r;
    if (a[piv][col] === 0 || !Number.isFinite(a[piv][col])) return null;
    [a[col], a[piv]] = [a[piv], a[col]];
    for (let r = col + 1; r < n; r++) {
      const factor = a[r][col] / a[col][col];
      for (let j = col; j <= n; j++) a[r][j] -= factor * a[col][j];
    }
  }
  const x = new Array<number>(n).fill(0);
  for (let i = n - 1; i >= 0; i--) {
    let s = a[i][n];
    for (let j = i + 1; j < n; j++) s -= a[i][j] * x[j];
    x[i] = s / a[i][i];
  }
  return x.every(Number.isFinite) ? x : null;
}
