// Fixed-capacity columnar ring of recent samples, for the snapshot a dashboard gets when it (re)connects.
// Float64Array columns with NaN for "not sampled": memory is fixed however long the daemon runs.

import { emptyBatch, type SampleBatch, type SampleChannel } from '../api/messages.js';
import { SAMPLE_KEYS, type Sample } from './telemetry.js';

export class SampleRing {
  private readonly cols: Record<'t' | 'dt' | SampleChannel, Float64Array>;
  private head = 0;
  private count = 0;

  constructor(readonly capacity: number) {
    const mk = () => new Float64Array(capacity);
    this.cols = { t: mk(), dt: mk(), thrust: mk(), voltage: mk(), current: mk(), power: mk(), rpm: mk(), temp: mk(), torque: mk(), out: mk() };
  }

  get size(): number {
    return this.count;
  }

  push(s: Sample): void {
    const i = this.head;
    this.cols.t[i] = s.t;
    this.cols.dt[i] = s.dt;
    for (const k of SAMPLE_KEYS) this.cols[k][i] = s[k] ?? NaN;
    this.head = (i + 1) % this.capacity;
    if (this.count < this.capacity) this.count++;
  }

  /**
   * Samples with host time >= sinceMs, oldest first, thinned to at most maxPoints by keeping every k-th.
   * Thinning by stride (not averaging) keeps every returned row a real sample.
   */
  toBatch(sinceMs: number, maxPoints: number): SampleBatch {
    const out = emptyBatch();
    const start = (this.head - this.count + this.capacity) % this.capacity;
    let first = 0;
    // find the first index (in age order) at or after sinceMs
    let lo = 0;
    let hi = this.count;
    while (lo < hi) {
      const mid = (lo + hi) >> 1;
      if (this.cols.t[(start + mid) % this.capacity] < sinceMs) lo = mid + 1;
      else hi = mid;
    }
    first = lo;
    const n = this.count - first;
    const stride = Math.max(1, Math.ceil(n / Math.max(1, maxPoints)));
    for (let j = first; j < this.count; j += stride) {
      const i = (start + j) % this.capacity;
      out.t.push(this.cols.t[i]);
      out.dt.push(this.cols.dt[i]);
      for (const k of SAMPLE_KEYS) {
        const v = this.cols[k][i];
        out[k].push(Number.isNaN(v) ? null : v);
      }
    }
    return out;
  }
}

/** Appends a sample to a columnar batch being built for broadcast. */
export function appendToBatch(b: SampleBatch, s: Sample): void {
  b.t.push(s.t);
  b.dt.push(s.dt);
  for (const k of SAMPLE_KEYS) b[k].push(s[k]);
}
