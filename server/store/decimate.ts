// Thinning a long recording to what a plot or a report can show. Pure and streaming: rows go in one at a
// time (straight from a database cursor), so a one-hour session never has to sit in memory whole.
//
// Min/max keeps, per time bucket, the rows holding the smallest and the largest value of one channel, so a
// spike or a dip survives thinning (a stride would step over it). Stride keeps every k-th row.

import type { SampleBatch } from '../api/messages.js';
import { SAMPLE_COLUMNS } from './schema.js';

/** One stored sample in column order: t, dt, then SAMPLE_COLUMNS. */
export type SampleRow = (number | null)[];

export interface Decimator {
  push(row: SampleRow): void;
  /** Rows kept, in time order. */
  finish(): SampleRow[];
}

export function keepAll(): Decimator {
  const out: SampleRow[] = [];
  return { push: (r) => void out.push(r), finish: () => out };
}

/** Every k-th of `total` rows, k chosen so at most `points` rows come out. */
export function strideDecimator(total: number, points: number): Decimator {
  const k = Math.max(1, Math.ceil(total / Math.max(1, points)));
  const out: SampleRow[] = [];
  let i = 0;
  return {
    push(r) {
      if (i++ % k === 0) out.push(r);
    },
    finish: () => out,
  };
}

/**
 * Min and max of column `col` (an index into the row) per bucket of equal time width between tFirst and tLast;
 * at most `points` rows out. A bucket whose channel is null throughout keeps its first row so gaps stay visible
 * in time.
 */
export function minmaxDecimator(tFirst: number, tLast: number, points: number, col: number): Decimator {
  const buckets = Math.max(1, Math.floor(points / 2));
  const width = (tLast - tFirst) / buckets || 1;
  const out: SampleRow[] = [];
  let bucket = -1;
  let lo: SampleRow | null = null;
  let hi: SampleRow | null = null;
  let first: SampleRow | null = null;
  const emit = () => {
    if (lo && hi) {
      if (lo === hi) out.push(lo);
      else if ((lo[0] as number) <= (hi[0] as number)) out.push(lo, hi);
      else out.push(hi, lo);
    } else if (first) out.push(first);
    lo = hi = first = null;
  };
  return {
    push(r) {
      const b = Math.min(buckets - 1, Math.floor(((r[0] as number) - tFirst) / width));
      if (b !== bucket) {
        emit();
        bucket = b;
        first = r;
      }
      const v = r[col];
      if (v === null || v === undefined) return;
      if (!lo || v < (lo[col] as number)) lo = r;
      if (!hi || v > (hi[col] as number)) hi = r;
    },
    finish() {
      emit();
      return out;
    },
  };
}

export function rowsToBatch(rows: SampleRow[]): SampleBatch {
  const batch: SampleBatch = { t: new Array(rows.length), dt: new Array(rows.length) } as SampleBatch;
  for (const c of SAMPLE_COLUMNS) batch[c] = new Array(rows.length);
  for (let i = 0; i < rows.length; i++) {
    const r = rows[i];
    batch.t[i] = r[0] as number;
    // dt is optional in the table (an imported file may lack it); the API type wants a number, NaN marks absent.
    batch.dt[i] = r[1] === null ? NaN : (r[1] as number);
    for (let c = 0; c < SAMPLE_COLUMNS.length; c++) batch[SAMPLE_COLUMNS[c]][i] = r[c + 2];
  }
  return batch;
}
