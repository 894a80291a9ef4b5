// The dashboard's redraw scheduling and the incremental thrust-per-watt pairing, without a browser: a driven
// clock stands in for animation frames and timers.

import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { emptyBatch, type SampleBatch } from '../server/api/messages.js';
import { SampleRing } from '../web/src/data/ring.js';
import { LiveEfficiency, efficiencyPoints, thinScatter } from '../web/src/data/decimate.js';
import { DrawScheduler, type SchedulerHost } from '../web/src/data/frame.js';

interface Row {
  t: number;
  thrust: number | null;
  power: number | null;
  out: number | null;
}

function batch(rows: Row[]): SampleBatch {
  const b = emptyBatch();
  for (const r of rows) {
    b.t.push(r.t);
    b.dt.push(r.t / 1000);
    b.thrust.push(r.thrust);
    b.voltage.push(null);
    b.current.push(null);
    b.power.push(r.power);
    b.rpm.push(null);
    b.temp.push(null);
    b.torque.push(null);
    b.out.push(r.out);
  }
  return b;
}

/** Thrust and power at different rates, the output sometimes cut, power sometimes under the 1 W floor. */
const rowsArb = fc.array(
  fc.record({
    dt: fc.integer({ min: 1, max: 120 }),
    thrust: fc.option(fc.integer({ min: 1, max: 800 }).map((v) => v / 100), { freq: 2 }),
    power: fc.option(fc.integer({ min: 0, max: 2000 }).map((v) => v / 10), { freq: 2 }),
    out: fc.option(fc.constantFrom(0, 0.005, 0.3, 0.45, 0.6, 0.6, 0.6, 0.6), { freq: 3 }),
  }),
  { minLength: 20, maxLength: 400, size: 'medium' },
);

function toRows(raw: { dt: number; thrust: number | null; power: number | null; out: number | null }[]): Row[] {
  let t = 1_000_000;
  return raw.map((r) => ({ t: (t += r.dt), thrust: r.thrust, power: r.power, out: r.out }));
}

describe('LiveEfficiency', () => {
  it('fed in chunks of any size, pairs exactly as efficiencyPoints over the whole stream', () => {
    fc.assert(
      fc.property(rowsArb, fc.array(fc.integer({ min: 1, max: 60 }), { minLength: 1, maxLength: 20 }), (raw, cuts) => {
        const rows = toRows(raw);
        const ring = new SampleRing(1000);
        const live = new LiveEfficiency();
        let got = live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, -Infinity);
        for (let i = 0, c = 0; i < rows.length; c++) {
          const n = cuts[c % cuts.length];
          ring.append(batch(rows.slice(i, i + n)));
          i += n;
          got = live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, -Infinity);
        }
        const want = efficiencyPoints(ring.t, ring.ch.thrust, ring.ch.power, ring, 0, ring.length, ring.ch.out);
        expect(Array.from(got.thrustN)).toEqual(want.thrustN);
        expect(Array.from(got.gramsPerWatt)).toEqual(want.gramsPerWatt);
      }),
      { numRuns: 150 },
    );
  });

  it('keeps, as the window slides, exactly the points whose thrust sample is inside it', () => {
    fc.assert(
      fc.property(rowsArb, fc.integer({ min: 50, max: 3000 }), (raw, windowMs) => {
        const rows = toRows(raw);
        const ring = new SampleRing(1000);
        const sliding = new LiveEfficiency();
        // Everything since the first window's edge: both start pairing there (the one documented difference
        // from efficiencyPoints is at that edge), and this one never drops a point.
        const all = new LiveEfficiency();
        let firstFrom = NaN;
        for (let i = 0; i < rows.length; i += 17) {
          ring.append(batch(rows.slice(i, i + 17)));
          const from = ring.lastT() - windowMs;
          if (Number.isNaN(firstFrom)) firstFrom = from;
          const got = sliding.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, from);
          const every = all.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, firstFrom);
          const keep = Array.from(every.t).map((t) => t >= from);
          expect(Array.from(got.t)).toEqual(Array.from(every.t).filter((_, k) => keep[k]));
          expect(Array.from(got.gramsPerWatt)).toEqual(Array.from(every.gramsPerWatt).filter((_, k) => keep[k]));
        }
      }),
      { numRuns: 100 },
    );
  });

  it('reads the window again when it is widened, and starts over after a clear', () => {
    const rows: Row[] = Array.from({ length: 3000 }, (_, i) => ({ t: i, thrust: 2 + (i % 7) * 0.1, power: 40, out: 0.4 }));
    const ring = new SampleRing(5000);
    ring.append(batch(rows));
    const live = new LiveEfficiency();
    expect(live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, 2500).t.length).toBe(500);
    const wide = live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, 1000);
    expect(wide.t.length).toBe(2000);
    expect(wide.t[0]).toBe(1000);
    ring.clear();
    ring.append(batch(rows.slice(0, 10).map((r) => ({ ...r, t: r.t + 10_000 }))));
    const fresh = live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, 0);
    expect(Array.from(fresh.t)).toEqual([10_000, 10_001, 10_002, 10_003, 10_004, 10_005, 10_006, 10_007, 10_008, 10_009]);
  });

  it('starts over when rows it had not read were overwritten in the ring', () => {
    const ring = new SampleRing(100);
    const live = new LiveEfficiency();
    const rows: Row[] = Array.from({ length: 1000 }, (_, i) => ({ t: i, thrust: 3, power: 50, out: 0.5 }));
    ring.append(batch(rows.slice(0, 50)));
    expect(live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, -Infinity).t.length).toBe(50);
    ring.append(batch(rows.slice(50, 1000))); // 950 more into a ring of 100
    const got = live.update(ring, ring.ch.thrust, ring.ch.power, ring.ch.out, -Infinity);
    expect(Array.from(got.t)).toEqual(ring.column('t'));
  });
});

describe('thinScatter', () => {
  it('keeps exactly the newest point of every occupied cell, in input order', () => {
    const coord = fc.oneof({ weight: 9, arbitrary: fc.integer({ min: -1000, max: 1000 }).map((v) => v / 10) }, { weight: 1, arbitrary: fc.constantFrom(NaN, Infinity) });
    fc.assert(
      fc.property(fc.array(fc.tuple(coord, coord), { maxLength: 300 }), fc.integer({ min: 1, max: 40 }), fc.integer({ min: 1, max: 40 }), (pts, cols, rows) => {
        const xs = pts.map((p) => p[0]);
        const ys = pts.map((p) => p[1]);
        const got = thinScatter(Float64Array.from(xs), Float64Array.from(ys), cols, rows);
        const finite = pts.map((p, i) => ({ x: p[0], y: p[1], i })).filter((p) => Number.isFinite(p.x) && Number.isFinite(p.y));
        if (finite.length === 0) {
          expect(got.x).toEqual([]);
          return;
        }
        const [x0, x1] = [Math.min(...finite.map((p) => p.x)), Math.max(...finite.map((p) => p.x))];
        const [y0, y1] = [Math.min(...finite.map((p) => p.y)), Math.max(...finite.map((p) => p.y))];
        // The grid spans the points' own extent, scaled a hair under cols (rows) so the largest value falls
        // in the last cell; written with Math.floor and division, against the implementation's | 0.
        const cell = (p: { x: number; y: number }) => {
          const cx = x1 > x0 ? Math.floor((p.x - x0) * ((cols - 1e-9) / (x1 - x0))) : 0;
          const cy = y1 > y0 ? Math.floor((p.y - y0) * ((rows - 1e-9) / (y1 - y0))) : 0;
          return cy * cols + cx;
        };
        const newest = new Map<number, number>();
        for (const p of finite) newest.set(cell(p), p.i);
        const want = [...newest.values()].sort((a, b) => a - b);
        expect(got.x).toEqual(want.map((i) => xs[i]));
        expect(got.y).toEqual(want.map((i) => ys[i]));
      }),
      { numRuns: 300 },
    );
  });
});

/** Animation frames and timers on a driven clock. */
class FakeHost implements SchedulerHost {
  time = 0;
  frames: (() => void)[] = [];
  timers = new Map<number, { at: number; cb: () => void }>();
  private _id = 1;
  requestFrame = (cb: () => void) => {
    this.frames.push(cb);
    return this._id++;
  };
  cancelFrame = () => {
    this.frames = [];
  };
  setTimer = (cb: () => void, ms: number) => {
    const id = this._id++;
    this.timers.set(id, { at: this.time + ms, cb });
    return id;
  };
  clearTimer = (id: number) => {
    this.timers.delete(id);
  };
  now = () => this.time;

  /** Advances 16 ms, fires due timers, then runs the frame callbacks requested so far. */
  frame(): void {
    this.time += 16;
    for (const [id, t] of [...this.timers]) {
      if (t.at <= this.time) {
        this.timers.delete(id);
        t.cb();
      }
    }
    const cbs = this.frames.splice(0);
    for (const cb of cbs) cb();
  }
}

describe('DrawScheduler', () => {
  it('spreads six charts over frames within the budget, each drawn once', () => {
    const host = new FakeHost();
    const s = new DrawScheduler(2, host);
    const drawn: string[][] = [];
    let current: string[] = [];
    const names = ['scatter', 'a', 'b', 'c', 'd', 'e'];
    const jobs = names.map((n) => s.add(() => current.push(n), { minIntervalMs: () => 0, cost: n === 'scatter' ? 2 : 1 }));
    for (const j of jobs) j.request();
    for (let f = 0; f < 10 && host.frames.length > 0; f++) {
      current = [];
      host.frame();
      drawn.push(current);
    }
    expect(drawn.flat().sort()).toEqual([...names].sort());
    for (const frame of drawn) {
      const cost = frame.reduce((a, n) => a + (n === 'scatter' ? 2 : 1), 0);
      expect(cost).toBeLessThanOrEqual(2);
    }
    expect(drawn.length).toBe(4); // 2 + 1 + 1 + 1 + 1 + 1 = 7 units over a budget of 2
    expect(host.frames.length).toBe(0); // nothing left: no more frames asked for
  });

  it('lets a job that costs more than the budget draw alone', () => {
    const host = new FakeHost();
    const s = new DrawScheduler(1, host);
    let draws = 0;
    s.add(() => draws++, { minIntervalMs: () => 0, cost: 3 }).request();
    host.frame();
    expect(draws).toBe(1);
  });

  it('waits out a job interval on a timer, asking for no frames meanwhile', () => {
    const host = new FakeHost();
    const s = new DrawScheduler(2, host);
    const at: number[] = [];
    const job = s.add(() => at.push(host.time), { minIntervalMs: () => 100, cost: 1 });
    job.request();
    host.frame();
    expect(at).toEqual([16]);
    job.request(); // new data at once: too early
    expect(host.frames.length).toBe(0);
    expect(host.timers.size).toBe(1);
    for (let f = 0; f < 10; f++) host.frame();
    expect(at).toEqual([16, 128]); // the first frame at or after 16 + 100 ms
    expect(job.pending).toBe(false);
  });

  it('takes turns: under load, the job waiting longest draws first', () => {
    const host = new FakeHost();
    const s = new DrawScheduler(1, host);
    const order: number[] = [];
    const jobs = [0, 1, 2, 3].map((i) => s.add(() => order.push(i), { minIntervalMs: () => 0, cost: 1 }));
    for (let f = 0; f < 12; f++) {
      for (const j of jobs) j.request(); // data for everyone every frame
      host.frame();
    }
    expect(order).toEqual([0, 1, 2, 3, 0, 1, 2, 3, 0, 1, 2, 3]);
  });

  it('keeps drawing the others when one draw throws, and reports the error', () => {
    const host = new FakeHost();
    const s = new DrawScheduler(3, host);
    let ok = 0;
    s.add(() => {
      throw new Error('broken chart');
    }, { minIntervalMs: () => 0, cost: 1 }).request();
    s.add(() => ok++, { minIntervalMs: () => 0, cost: 1 }).request();
    expect(() => host.frame()).toThrow('broken chart');
    expect(ok).toBe(1);
  });

  it('forgets a released job and a cancelled request', () => {
    const host = new FakeHost();
    const s = new DrawScheduler(2, host);
    let draws = 0;
    const a = s.add(() => draws++, { minIntervalMs: () => 0, cost: 1 });
    const b = s.add(() => draws++, { minIntervalMs: () => 0, cost: 1 });
    a.request();
    a.release();
    b.request();
    b.cancel();
    host.frame();
    expect(draws).toBe(0);
    a.request(); // released: ignored
    expect(host.frames.length).toBe(0);
  });
});
