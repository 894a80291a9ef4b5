import { describe, expect, it } from 'vitest';
import { DeviceClock, TelemetryPipeline, type Sample } from '../server/bench/telemetry.js';
import { SampleRing } from '../server/bench/history.js';

describe('device clock', () => {
  it('unwraps the 32-bit microsecond counter monotonically', () => {
    const c = new DeviceClock();
    const near = 2 ** 32 - 1000;
    expect(c.unwrap(near)).toBeCloseTo(near / 1e6, 9);
    const after = c.unwrap(500); // wrapped: 1500 us later
    expect(after - near / 1e6).toBeCloseTo(1500e-6, 9);
    expect(c.unwrap(2 ** 31)).toBeGreaterThan(after);
  });
  it('a small step back (reordering, not a wrap) does not add an epoch', () => {
    const c = new DeviceClock();
    c.unwrap(1_000_000);
    expect(c.unwrap(999_000)).toBeCloseTo(0.999, 9);
  });
});

describe('telemetry pipeline', () => {
  it('derives power from the latest voltage and current, calibrates, leaves absent channels null', () => {
    const p = new TelemetryPipeline();
    p.calibration.thrust = { scale: 2, offset: -0.5 };
    const a = p.toSample({ tag: 'TEL', seq: 0, fields: { t: 1000, v: 16, i: 2 } }, 1);
    expect(a.power).toBe(32);
    expect(a.thrust).toBeNull();
    const b = p.toSample({ tag: 'TEL', seq: 1, fields: { t: 2000, i: 3, thrust: 1.5 } }, 2);
    expect(b.power).toBe(48); // held voltage 16 V x new current 3 A
    expect(b.voltage).toBeNull();
    expect(b.thrust).toBe(2.5);
    const c = p.toSample({ tag: 'TEL', seq: 2, fields: { t: 3000, rpm: 5000 } }, 3);
    expect(c.power).toBeNull(); // no electrical reading in this frame
  });
});

describe('sample ring', () => {
  const mk = (t: number): Sample => ({ t, dt: t / 1000, thrust: t % 2 ? null : t, voltage: 1, current: 2, power: 2, rpm: null, temp: null, torque: null, out: 0 });
  it('keeps the newest samples in order, with nulls preserved', () => {
    const r = new SampleRing(10);
    for (let t = 0; t < 25; t++) r.push(mk(t));
    expect(r.size).toBe(10);
    const b = r.toBatch(0, 100);
    expect(b.t).toEqual([15, 16, 17, 18, 19, 20, 21, 22, 23, 24]);
    expect(b.thrust[0]).toBeNull();
    expect(b.thrust[1]).toBe(16);
  });
  it('filters by time and thins to a maximum point count', () => {
    const r = new SampleRing(1000);
    for (let t = 0; t < 1000; t++) r.push(mk(t));
    const b = r.toBatch(500, 100);
    expect(b.t[0]).toBe(500);
    expect(b.t.length).toBeLessThanOrEqual(100);
    expect(b.t.length).toBeGreaterThanOrEqual(90);
  });
});

describe('live batch thinning', () => {
  it('keeps every sparse channel and the last row, and never exceeds the row cap', async () => {
    const { thinBatch, appendToBatch } = await import('../server/bench/history.js');
    const { emptyBatch } = await import('../server/api/messages.js');
    const b = emptyBatch();
    // 20 kHz electrical rows with a thrust value only every 250th row (80 Hz)
    for (let i = 0; i < 1000; i++) {
      appendToBatch(b, { t: i, dt: i / 20000, thrust: i % 250 === 7 ? i : null, voltage: 16, current: 1, power: 16, rpm: null, temp: null, torque: null, out: 0.5 });
    }
    const thin = thinBatch(b, 50);
    expect(thin.t.length).toBe(50);
    expect(thin.t[49]).toBe(999);
    expect(thin.thrust.filter((x) => x !== null)).toEqual([7, 257, 507, 757]);
    expect(thinBatch(b, 5000)).toBe(b); // under the cap: untouched
  });

  it('the typed-array live batch gives what thinBatch gives on plain arrays, through growth and reuse', async () => {
    const { thinBatch, appendToBatch, LiveBatch } = await import('../server/bench/history.js');
    const { emptyBatch } = await import('../server/api/messages.js');
    const live = new LiveBatch(16); // small, so it grows several times
    for (const [n, cap] of [
      [3000, 250],
      [40, 250],
      [1, 250],
      [777, 100],
    ] as const) {
      const ref = emptyBatch();
      for (let i = 0; i < n; i++) {
        const s = {
          t: 1e12 + i,
          dt: i / 1000,
          thrust: i % 37 === 0 ? -0.25 * i : null,
          voltage: 16 - i * 1e-4,
          current: i % 2 ? 3.5 : null,
          power: i % 2 ? 56 : null,
          rpm: i % 5 === 0 ? 9000 + i : null,
          temp: null,
          torque: i === n - 1 ? 0.01 : null,
          out: 0,
        };
        appendToBatch(ref, s);
        live.add(s);
      }
      expect(live.size).toBe(n);
      expect(live.take(cap)).toEqual(thinBatch(ref, cap));
      expect(live.size).toBe(0);
    }
    expect(live.take(250)).toEqual(emptyBatch());
  });
});
