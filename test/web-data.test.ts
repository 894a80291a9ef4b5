// The dashboard's data layer without a browser: the sample ring, decimation and scatter thinning, the
// connection state machine, and BenchClient driven through a fake socket.

import { afterEach, beforeEach, describe, expect, it, vi } from 'vitest';
import fc from 'fast-check';
import { API_VERSION, emptyBatch, type BenchView, type LinkView, type SampleBatch, type ServerMessage, type Snapshot } from '../server/api/messages.js';
import { SampleRing } from '../web/src/data/ring.js';
import { LiveDecimator, MIN_EFFICIENCY_POWER_W, TRANSIENT_MS, bucketWidth, decimateMinMax, efficiencyPoints, linearWindow, thinScatter } from '../web/src/data/decimate.js';
import { FrameCoalescer } from '../web/src/data/frame.js';
import { backoffDelay, closeReason, initialConnection, nextConnection, CLOSE_TOKEN_REFUSED } from '../web/src/data/connection.js';
import { BenchClient, type SocketLike } from '../web/src/data/client.js';
import { socketUrl, takeToken } from '../web/src/data/token.js';
import { GRAM_FORCE_N, Preferences, thrustFromNewtons } from '../web/src/data/units.js';
import { readPrediction } from '../web/src/data/prediction.js';
import { isWordField } from '../web/src/keys.js';

function batch(rows: { t: number; thrust?: number | null; power?: number | null; rpm?: number | null }[]): SampleBatch {
  const b = emptyBatch();
  for (const r of rows) {
    b.t.push(r.t);
    b.dt.push(r.t / 1000);
    b.thrust.push(r.thrust === undefined ? null : r.thrust);
    b.voltage.push(null);
    b.current.push(null);
    b.power.push(r.power === undefined ? null : r.power);
    b.rpm.push(r.rpm === undefined ? null : r.rpm);
    b.temp.push(null);
    b.torque.push(null);
    b.out.push(null);
  }
  return b;
}

const ramp = (from: number, n: number, stepMs = 10, f: (i: number) => number = (i) => i) =>
  batch(Array.from({ length: n }, (_, i) => ({ t: from + i * stepMs, thrust: f(i) })));

describe('SampleRing', () => {
  it('keeps the newest samples in order once it wraps, with NaN for null', () => {
    const ring = new SampleRing(5);
    ring.append(ramp(1000, 3));
    expect(ring.column('thrust')).toEqual([0, 1, 2]);
    expect(ring.column('rpm').every(Number.isNaN)).toBe(true);
    ring.append(ramp(1030, 4, 10, (i) => 10 + i));
    expect(ring.length).toBe(5);
    expect(ring.column('thrust')).toEqual([2, 10, 11, 12, 13]);
    expect(ring.column('t')).toEqual([1020, 1030, 1040, 1050, 1060]);
    expect(ring.appended).toBe(7);
    expect(ring.firstT()).toBe(1020);
    expect(ring.lastT()).toBe(1060);
  });

  it('remembers the last finite value of each channel for the readouts', () => {
    const ring = new SampleRing(10);
    ring.append(batch([{ t: 1, thrust: 1.5, rpm: 3000 }, { t: 2, thrust: 1.6 }, { t: 3, thrust: null }]));
    expect(ring.latest.thrust).toBeCloseTo(1.6, 6);
    expect(ring.latestT.thrust).toBe(2);
    expect(ring.latest.rpm).toBe(3000);
    expect(ring.latestT.rpm).toBe(1);
    expect(Number.isNaN(ring.latest.power)).toBe(true);
  });

  it('finds the first sample at or after a time, across the wrap', () => {
    const ring = new SampleRing(8);
    ring.append(ramp(0, 13, 100)); // keeps t = 500..1200
    expect(ring.lowerBound(-1)).toBe(0);
    expect(ring.lowerBound(500)).toBe(0);
    expect(ring.lowerBound(501)).toBe(1);
    expect(ring.lowerBound(1000)).toBe(5);
    expect(ring.lowerBound(1200)).toBe(7);
    expect(ring.lowerBound(1201)).toBe(8);
  });

  it('keeps time sorted when the host clock steps back, and skips rows without a time', () => {
    const ring = new SampleRing(10);
    const b = batch([{ t: 100, thrust: 1 }, { t: 90, thrust: 2 }, { t: 110, thrust: 3 }]);
    b.t.push(Number.NaN as unknown as number);
    b.thrust.push(4);
    expect(ring.append(b)).toBe(3);
    expect(ring.column('t')).toEqual([100, 100, 110]);
    expect(ring.column('thrust')).toEqual([1, 2, 3]);
  });

  it('treats a malformed batch as empty and refuses a silly capacity', () => {
    const ring = new SampleRing(4);
    expect(ring.append({} as SampleBatch)).toBe(0);
    const v = ring.version;
    ring.append(ramp(0, 2));
    expect(ring.version).toBeGreaterThan(v);
    expect(() => new SampleRing(1)).toThrow(RangeError);
    expect(() => new SampleRing(2.5)).toThrow(RangeError);
  });
});

describe('decimateMinMax', () => {
  it('passes few points through untouched (NaN skipped, scale applied)', () => {
    const x = [0, 10, 20, 30];
    const y = [1, Number.NaN, 3, 4];
    const d = decimateMinMax(x, y, linearWindow(4), { i0: 0, i1: 4, xFrom: 0, xTo: 30, buckets: 100, gapX: 1000, scale: 2 });
    expect(d).toEqual({ x: [0, 20, 30], y: [2, 6, 8] });
  });

  it('keeps a one-sample spike and at most two points per bucket, in time order', () => {
    const n = 10_000;
    const x = Array.from({ length: n }, (_, i) => i);
    const y = Array.from({ length: n }, (_, i) => Math.sin(i / 50));
    y[4321] = 50;
    y[7777] = -50;
    const d = decimateMinMax(x, y, linearWindow(n), { i0: 0, i1: n, xFrom: 0, xTo: n, buckets: 200, gapX: 10 });
    expect(d.x.length).toBeLessThanOrEqual(400);
    expect(Math.max(...(d.y as number[]))).toBe(50);
    expect(Math.min(...(d.y as number[]))).toBe(-50);
    expect(d.x[d.y.indexOf(50)]).toBe(4321);
    for (let i = 1; i < d.x.length; i++) expect(d.x[i]).toBeGreaterThanOrEqual(d.x[i - 1]);
  });

  it('draws a channel sampled on one row in five as a line, and breaks it only at a real gap', () => {
    const n = 2000;
    const x = Array.from({ length: n }, (_, i) => i * 10 + (i >= 1000 ? 5000 : 0)); // 5 s hole in the middle
    const y = Array.from({ length: n }, (_, i) => (i % 5 === 0 ? i : Number.NaN));
    const d = decimateMinMax(x, y, linearWindow(n), { i0: 0, i1: n, xFrom: 0, xTo: x[n - 1], buckets: 100, gapX: 2000 });
    const nulls = d.y.filter((v) => v === null).length;
    expect(nulls).toBe(1);
    expect(d.y.filter((v) => v !== null).length).toBeGreaterThan(100);
  });

  it('reads a wrapped ring exactly as the same samples laid out flat', () => {
    const ring = new SampleRing(1000);
    ring.append(ramp(0, 1700, 10, (i) => Math.sin(i / 17) * 100 + (i % 97 === 0 ? 300 : 0)));
    const flatT = ring.column('t');
    const flatY = ring.column('thrust');
    const o = { i0: 0, i1: ring.length, xFrom: flatT[0], xTo: flatT[flatT.length - 1], buckets: 120, gapX: 1000 };
    expect(decimateMinMax(ring.t, ring.ch.thrust, ring, o)).toEqual(decimateMinMax(flatT, flatY, linearWindow(flatT.length), o));
  });

  it('property: output is sorted, within 2 points per bucket (+1 for the left edge), and keeps the extremes', () => {
    fc.assert(
      fc.property(
        fc.array(fc.double({ min: -1e6, max: 1e6, noNaN: true }), { minLength: 1, maxLength: 3000 }),
        fc.integer({ min: 1, max: 300 }),
        (ys, buckets) => {
          const x = ys.map((_, i) => i);
          const d = decimateMinMax(x, ys, linearWindow(ys.length), { i0: 0, i1: ys.length, xFrom: 0, xTo: ys.length, buckets, gapX: 10 });
          expect(d.x.length).toBeLessThanOrEqual(Math.max(ys.length, 2 * buckets + 2));
          for (let i = 1; i < d.x.length; i++) expect(d.x[i]).toBeGreaterThanOrEqual(d.x[i - 1]);
          const finite = d.y.filter((v): v is number => v !== null);
          expect(Math.max(...finite)).toBe(Math.max(...ys));
          expect(Math.min(...finite)).toBe(Math.min(...ys));
        },
      ),
      { numRuns: 150 },
    );
  });
});

describe('LiveDecimator', () => {
  it('property: after any sequence of appends it equals the stateless decimation from its first kept bucket', () => {
    fc.assert(
      fc.property(
        fc.array(
          fc.record({
            n: fc.integer({ min: 0, max: 400 }),
            step: fc.integer({ min: 1, max: 20 }),
            pause: fc.integer({ min: 0, max: 4000 }), // time jump before the batch: sometimes a gap
            nanEvery: fc.integer({ min: 0, max: 5 }),
          }),
          { minLength: 1, maxLength: 25 },
        ),
        fc.integer({ min: 20, max: 400 }),
        fc.constantFrom(1000, 3000, 10000),
        (batches, width, windowMs) => {
          const ring = new SampleRing(3000); // small, so it also wraps and overwrites
          const live = new LiveDecimator();
          let t = 1_000_000;
          let seed = 1;
          for (const b of batches) {
            t += b.pause;
            const rows = Array.from({ length: b.n }, (_, i) => {
              t += b.step;
              seed = (seed * 16807) % 2147483647;
              const thrust = b.nanEvery > 0 && i % b.nanEvery === 0 ? null : (seed / 2147483647) * 10 - 5;
              return { t, thrust };
            });
            ring.append(batch(rows));
            const xTo = ring.lastT();
            const xFrom = xTo - windowMs;
            const got = live.update(ring, ring.ch.thrust, xFrom, xTo, width, 2000, 2);
            const bw = bucketWidth(xFrom, xTo, width);
            const i0 = Math.max(0, Math.min(live.firstIndex(ring, xFrom, bw), ring.length));
            const want = decimateMinMax(ring.t, ring.ch.thrust, ring, { i0, i1: ring.length, xFrom, xTo, buckets: width, gapX: 2000, scale: 2 });
            expect(got).toEqual(want);
          }
        },
      ),
      {
        numRuns: 120,
        // Found by an earlier run: a sample exactly on a bucket edge, where x >= k * bw and floor(x / bw) < k.
        examples: [
          [
            [
              { n: 280, step: 19, pause: 3358, nanEvery: 0 }, { n: 264, step: 10, pause: 561, nanEvery: 0 }, { n: 290, step: 16, pause: 2294, nanEvery: 0 },
              { n: 126, step: 13, pause: 0, nanEvery: 0 }, { n: 218, step: 3, pause: 3986, nanEvery: 0 }, { n: 181, step: 6, pause: 3558, nanEvery: 0 },
              { n: 238, step: 1, pause: 2897, nanEvery: 0 }, { n: 281, step: 17, pause: 2980, nanEvery: 0 }, { n: 117, step: 5, pause: 3901, nanEvery: 0 },
              { n: 27, step: 20, pause: 396, nanEvery: 0 }, { n: 271, step: 15, pause: 441, nanEvery: 0 },
            ],
            240,
            1000,
          ],
        ],
      },
    );
  });

  it('starts over after a new snapshot clears the ring', () => {
    const ring = new SampleRing(100);
    const live = new LiveDecimator();
    ring.append(ramp(0, 50, 10, () => 5));
    expect(live.update(ring, ring.ch.thrust, 0, 500, 50, 1000).y).toContain(5);
    ring.clear();
    ring.append(ramp(0, 50, 10, () => 7));
    const again = live.update(ring, ring.ch.thrust, 0, 500, 50, 1000);
    expect(again.y).not.toContain(5);
    expect(again.y).toContain(7);
  });
});

describe('efficiencyPoints and thinScatter', () => {
  it('pairs each thrust sample with the mean power since the one before, in gram-force per watt', () => {
    const b = batch([
      { t: 0, power: 40 },
      { t: 5, power: 60 },
      { t: 10, thrust: 2 }, // mean of 40 and 60 W
      { t: 20, thrust: 2.2 }, // no new power: the 60 W sample is 15 ms old, still fresh
      { t: 600, thrust: 2.4 }, // power now 595 ms old: no point
      { t: 610, power: 0.5 },
      { t: 620, thrust: 2.5 }, // below the power floor: no point
    ]);
    const ring = new SampleRing(10);
    ring.append(b);
    const p = efficiencyPoints(ring.t, ring.ch.thrust, ring.ch.power, ring, 0, ring.length);
    expect(p.thrustN.map((v) => +v.toFixed(4))).toEqual([2, 2.2]);
    // 2 N = 203.94 gf; over 50 W that is 4.079 gf/W.
    expect(p.gramsPerWatt[0]).toBeCloseTo(2 / GRAM_FORCE_N / 50, 4);
    expect(p.gramsPerWatt[1]).toBeCloseTo(2.2 / GRAM_FORCE_N / 60, 4);
  });

  it('leaves out rows where the device reports the throttle output at zero', () => {
    const b = batch([
      { t: 0, power: 40 },
      { t: 10, thrust: 2 },
      { t: 20, power: 40 },
      { t: 30, thrust: 1.5 },
    ]);
    b.out = [0.3, null, 0, null]; // output cut between the two thrust samples
    const ring = new SampleRing(10);
    ring.append(b);
    const p = efficiencyPoints(ring.t, ring.ch.thrust, ring.ch.power, ring, 0, ring.length, ring.ch.out);
    expect(p.thrustN).toEqual([2]);
  });

  it('keeps one point per cell, the newest, in input order', () => {
    const xs = [0, 0.01, 5, 10, 10.001];
    const ys = [0, 0.01, 5, 10, 10.001];
    const t = thinScatter(xs, ys, 10, 10);
    expect(t.x).toEqual([0.01, 5, 10.001]);
    expect(thinScatter([1, 2, Number.NaN], [1, 2, 3], 100, 100).x).toEqual([1, 2]);
    expect(thinScatter([], [], 10, 10).x).toEqual([]);
  });
});

describe('FrameCoalescer', () => {
  it('draws once per frame however often it is asked', () => {
    const frames: (() => void)[] = [];
    let draws = 0;
    const f = new FrameCoalescer(
      () => draws++,
      (cb) => frames.push(cb),
      () => undefined,
    );
    for (let i = 0; i < 50; i++) f.schedule();
    expect(frames.length).toBe(1);
    frames.shift()!();
    expect(draws).toBe(1);
    f.schedule();
    f.cancel();
    expect(f.pending).toBe(false);
  });
});

describe('connection state machine', () => {
  it('backs off 0.5, 1, 2, 4, 8, then 10 s at most', () => {
    expect([1, 2, 3, 4, 5, 6, 20].map((n) => backoffDelay(n))).toEqual([500, 1000, 2000, 4000, 8000, 10000, 10000]);
  });

  it('goes connecting -> syncing -> live, resets failures on a snapshot, and stops retrying a refused token', () => {
    let v = initialConnection(true);
    v = nextConnection(v, { kind: 'connect' }, 0);
    expect(v.state).toBe('connecting');
    v = nextConnection(v, { kind: 'closed', code: 1006, reason: '' }, 100);
    expect(v).toMatchObject({ state: 'waiting', failures: 1, retryAt: 600 });
    expect(v.reason).toMatch(/could not connect: check the token in the URL/);
    v = nextConnection(nextConnection(v, { kind: 'connect' }, 600), { kind: 'open' }, 610);
    expect(v.state).toBe('syncing');
    expect(nextConnection(v, { kind: 'snapshot' }, 620)).toMatchObject({ state: 'live', failures: 0 });
    const refused = nextConnection(v, { kind: 'closed', code: CLOSE_TOKEN_REFUSED, reason: '' }, 700);
    expect(refused.state).toBe('refused');
    expect(nextConnection(refused, { kind: 'connect' }, 800)).toBe(refused);
    expect(nextConnection(initialConnection(false), { kind: 'connect' }, 0).state).toBe('no_token');
  });

  it('names the close causes', () => {
    expect(closeReason(1006, '', 'live')).toBe('connection lost');
    expect(closeReason(1001, '', 'live')).toMatch(/went away/);
    expect(closeReason(1008, 'origin', 'syncing')).toBe('closed by the daemon (code 1008: origin)');
  });
});

// ---------------------------------------------------------------- BenchClient

class FakeSocket implements SocketLike {
  readyState = 0;
  sent: Record<string, unknown>[] = [];
  closedWith: { code?: number; reason?: string } | null = null;
  onopen: SocketLike['onopen'] = null;
  onmessage: SocketLike['onmessage'] = null;
  onclose: SocketLike['onclose'] = null;
  onerror: SocketLike['onerror'] = null;
  constructor(readonly url: string) {}
  send(data: string): void {
    this.sent.push(JSON.parse(data) as Record<string, unknown>);
  }
  close(code?: number, reason?: string): void {
    this.closedWith = { code, reason };
    this.readyState = 3;
  }
  open(): void {
    this.readyState = 1;
    this.onopen?.({});
  }
  receive(m: ServerMessage | string): void {
    this.onmessage?.({ data: typeof m === 'string' ? m : JSON.stringify(m) });
  }
  serverClose(code: number, reason = ''): void {
    this.readyState = 3;
    this.onclose?.({ code, reason });
  }
}

const bench = (state: BenchView['state']): BenchView => ({
  state,
  reason: 'test',
  since: 0,
  armed: state === 'armed' || state === 'running',
  throttleCommand: 0,
  throttleOutput: null,
  fault: 'none',
  ceiling: 0.8,
});
const link: LinkView = { status: 'ready', source: 'virtual bench (in process)', linesOk: 1, linesBad: {}, seqGaps: 0, writeDropped: 0, reconnects: 0, retryInMs: null, error: null };
const snapshot = (over: Partial<Snapshot> = {}): Snapshot => ({
  type: 'snapshot',
  api: API_VERSION,
  role: 'controller',
  bench: bench('safe'),
  link,
  identity: null,
  history: ramp(1000, 3),
  events: [],
  extras: {},
  ...over,
});

describe('BenchClient', () => {
  let sockets: FakeSocket[];
  let client: BenchClient;
  const sock = () => sockets[sockets.length - 1];
  const make = (url: string | null = 'ws://127.0.0.1:1/ws?token=abc') => {
    client = new BenchClient({ url, socketFactory: (u) => (sockets.push(new FakeSocket(u)), sock()), ringCapacity: 100, replyTimeoutMs: 1000, pingAfterMs: 2000, staleAfterMs: 6000 });
    return client;
  };

  beforeEach(() => {
    vi.useFakeTimers();
    sockets = [];
  });
  afterEach(() => {
    client?.close();
    vi.useRealTimers();
  });

  it('takes the snapshot, then appends only samples that come after it', () => {
    const changes: string[] = [];
    make().subscribe((c) => changes.push(c));
    client.start();
    expect(client.connection.state).toBe('connecting');
    sock().open();
    sock().receive({ type: 'samples', batch: ramp(0, 5) }); // before the snapshot: out of context, ignored
    expect(client.ring.length).toBe(0);
    sock().receive(snapshot());
    expect(client.connection.state).toBe('live');
    expect(client.ring.column('t')).toEqual([1000, 1010, 1020]);
    sock().receive({ type: 'samples', batch: ramp(1030, 2, 10, () => 7) });
    expect(client.ring.length).toBe(5);
    expect(client.ring.latest.thrust).toBe(7);
    sock().receive({ type: 'bench', bench: bench('armed') });
    sock().receive({ type: 'event', event: { t: 1, level: 'warn', kind: 'warning', text: 'hot' } });
    sock().receive({ type: 'extras', extras: { prediction: 1 } });
    expect(client.bench?.state).toBe('armed');
    expect(client.events.map((e) => e.text)).toEqual(['hot']);
    expect(client.extras.prediction).toBe(1);
    expect(changes).toEqual(['connection', 'connection', 'connection', 'snapshot', 'samples', 'bench', 'events', 'extras']);
  });

  it('counts frames that are not messages and carries on', () => {
    make().start();
    sock().open();
    sock().receive('not json');
    sock().receive('{"no":"type"}');
    sock().receive(snapshot());
    expect(client.badMessages).toBe(2);
    expect(client.connection.state).toBe('live');
  });

  it('numbers commands and resolves each with its own reply', async () => {
    make().start();
    sock().open();
    sock().receive(snapshot());
    const arm = client.send({ type: 'arm' });
    const thr = client.send({ type: 'throttle', value: 0.25 });
    expect(sock().sent).toEqual([
      { type: 'arm', id: 1 },
      { type: 'throttle', value: 0.25, id: 2 },
    ]);
    sock().receive({ type: 'reply', id: 2, ok: false, error: 'not_armed' });
    sock().receive({ type: 'reply', id: 1, ok: true });
    await expect(arm).resolves.toEqual({ ok: true });
    await expect(thr).resolves.toEqual({ ok: false, error: 'not_armed' });
    expect(client.lastCommand).toMatchObject({ type: 'arm', result: { ok: true } });
  });

  it('reports a command without a reply as failed after the time-out', async () => {
    make().start();
    sock().open();
    sock().receive(snapshot());
    const p = client.send({ type: 'tare' });
    vi.advanceTimersByTime(1001);
    await expect(p).resolves.toEqual({ ok: false, error: 'no reply within 1 s' });
  });

  it('as a viewer refuses control locally but still sends stop; stop goes out even before the snapshot', async () => {
    make().start();
    sock().open();
    void client.stop();
    expect(sock().sent).toEqual([{ type: 'stop', id: 1 }]);
    sock().receive(snapshot({ role: 'viewer' }));
    expect(client.canControl).toBe(false);
    await expect(client.send({ type: 'arm' })).resolves.toMatchObject({ ok: false, error: expect.stringMatching(/viewer/) });
    void client.stop();
    expect(sock().sent.map((m) => m.type)).toEqual(['stop', 'stop']);
  });

  it('says so when a stop cannot be sent at all', async () => {
    make().start();
    await expect(client.stop()).resolves.toMatchObject({ ok: false, error: expect.stringMatching(/not connected/) });
  });

  it('on a drop fails pending commands, backs off, reconnects and replaces its history with the new snapshot', async () => {
    make().start();
    sock().open();
    sock().receive(snapshot());
    sock().receive({ type: 'samples', batch: ramp(1030, 5) });
    const pending = client.send({ type: 'arm' });
    sock().serverClose(1006);
    await expect(pending).resolves.toEqual({ ok: false, error: 'connection lost before the reply' });
    expect(client.connection).toMatchObject({ state: 'waiting', failures: 1, reason: 'connection lost' });
    expect(sockets.length).toBe(1);
    vi.advanceTimersByTime(499);
    expect(sockets.length).toBe(1);
    vi.advanceTimersByTime(1);
    expect(sockets.length).toBe(2);
    sock().serverClose(1006); // refused before open this time
    expect(client.connection).toMatchObject({ state: 'waiting', failures: 2 });
    expect(client.connection.reason).toMatch(/could not connect/);
    vi.advanceTimersByTime(1000);
    expect(sockets.length).toBe(3);
    sock().open();
    sock().receive(snapshot({ history: ramp(9000, 2) }));
    expect(client.ring.column('t')).toEqual([9000, 9010]);
    expect(client.connection.failures).toBe(0);
  });

  it('stops trying after the token is refused, and never tries without one', () => {
    make().start();
    sock().open();
    sock().serverClose(CLOSE_TOKEN_REFUSED);
    expect(client.connection.state).toBe('refused');
    vi.advanceTimersByTime(60_000);
    expect(sockets.length).toBe(1);
    make(null).start();
    expect(client.connection.state).toBe('no_token');
    expect(sockets.length).toBe(1);
  });

  it('refuses a daemon that speaks another API version', () => {
    make().start();
    sock().open();
    sock().receive(snapshot({ api: API_VERSION + 1 }));
    expect(client.connection.state).toBe('refused');
    expect(client.connection.reason).toMatch(/API version/);
    expect(sock().closedWith?.code).toBe(1000);
  });

  it('pings a quiet daemon and gives up on a silent one', () => {
    make().start();
    sock().open();
    sock().receive(snapshot());
    vi.advanceTimersByTime(2000);
    // the page's heartbeat: a ping every second
    const types = sock().sent.map((m) => m.type);
    expect(types.length).toBeGreaterThanOrEqual(1);
    expect(types.every((t) => t === 'ping')).toBe(true);
    sock().receive({ type: 'reply', id: sock().sent[sock().sent.length - 1].id as number, ok: true });
    vi.advanceTimersByTime(5000); // heard at 2 s, so not stale yet at 7 s
    expect(client.connection.state).toBe('live');
    vi.advanceTimersByTime(1000);
    expect(client.connection.state).toBe('waiting');
    expect(sockets[0].closedWith?.code).toBe(4000);
    vi.advanceTimersByTime(500);
    expect(sockets.length).toBe(2);
  });

  it('keeps notifying the other listeners when one throws', () => {
    const err = vi.spyOn(console, 'error').mockImplementation(() => undefined);
    make();
    const seen: string[] = [];
    client.subscribe(() => {
      throw new Error('broken panel');
    });
    const off = client.subscribe((c) => seen.push(c));
    client.start();
    expect(seen).toEqual(['connection']);
    off();
    sock().open();
    expect(seen).toEqual(['connection']);
    expect(err).toHaveBeenCalled();
    client.close();
    err.mockRestore();
  });
});

describe('token, units, preferences, prediction hook, keys', () => {
  it('takes the token from the URL, keeps it for a reload and wipes it from the address bar', () => {
    const store = new Map<string, string>();
    const kv = { getItem: (k: string) => store.get(k) ?? null, setItem: (k: string, v: string) => void store.set(k, v) };
    const replaced: string[] = [];
    const history = { replaceState: (_d: unknown, _u: string, url?: string | URL | null) => void replaced.push(String(url)) };
    expect(takeToken({ href: 'http://127.0.0.1:8417/?token=s3cret&x=1#top' }, history, kv)).toBe('s3cret');
    expect(replaced).toEqual(['/?x=1#top']);
    expect(takeToken({ href: 'http://127.0.0.1:8417/' }, history, kv)).toBe('s3cret');
    expect(takeToken({ href: 'http://127.0.0.1:8417/' }, history, null)).toBeNull();
    expect(socketUrl('http://127.0.0.1:8417/?a', 'a b&c')).toBe('ws://127.0.0.1:8417/ws?token=a%20b%26c');
    expect(socketUrl('https://bench.invalid/', 't')).toBe('wss://bench.invalid/ws?token=t');
  });

  it('converts thrust to gram-force', () => {
    // 1 gf = 9.80665e-3 N: standard gravity (CGPM 1901; ISO 80000-3), as in ../shared/CHECKS.md.
    expect(thrustFromNewtons(9.80665e-3, 'gf')).toBeCloseTo(1, 12);
    expect(thrustFromNewtons(1, 'gf')).toBeCloseTo(101.9716, 4);
    expect(thrustFromNewtons(1, 'N')).toBe(1);
  });

  it('remembers the thrust unit and window, ignoring junk in storage', () => {
    const store = new Map<string, string>([['ductbench.prefs.v1', '{"thrustUnit":"lbf","windowS":300}']]);
    const kv = { getItem: (k: string) => store.get(k) ?? null, setItem: (k: string, v: string) => void store.set(k, v) };
    const p = new Preferences(kv);
    expect(p.thrustUnit).toBe('N');
    expect(p.windowS).toBe(300);
    let fired = 0;
    p.subscribe(() => fired++);
    p.set({ thrustUnit: 'gf' });
    p.set({ thrustUnit: 'gf' });
    expect(fired).toBe(1);
    expect(new Preferences(kv).thrustUnit).toBe('gf');
    const throwing = { getItem: () => { throw new Error('denied'); }, setItem: () => { throw new Error('denied'); } };
    const q = new Preferences(throwing);
    q.set({ windowS: 30 });
    expect(q.windowS).toBe(30);
  });

  it('reads extras.prediction only when its arrays line up', () => {
    expect(readPrediction({})).toBeNull();
    expect(readPrediction({ prediction: { thrust_N: [1, 2], grams_per_watt: [5] } })).toBeNull();
    const p = readPrediction({ prediction: { thrust_N: [1, 2], grams_per_watt: [9, 8], ideal_open_gpw: [36, 25], ideal_ducted_gpw: [null, 35] } });
    expect(p).toEqual({ thrustN: [1, 2], gramsPerWatt: [9, 8], idealOpen: [36, 25], idealDucted: [null, 35], bandLo: null, bandHi: null, band: null });
    expect(readPrediction({ prediction: { thrust_N: [1], grams_per_watt: [9] } })?.idealOpen).toEqual([null]);
    // The band, with an unbounded edge (null in JSON) where nothing is predicted; a band without its source is not drawn.
    const banded = { thrust_N: [1, 2], grams_per_watt: [9, 8], band_lo_gpw: [0, 7], band_hi_gpw: [null, 9], band_source: { kind: 'fit', text: 'from a fit' } };
    expect(readPrediction({ prediction: banded })).toMatchObject({ bandLo: [0, 7], bandHi: [null, 9], band: { kind: 'fit', text: 'from a fit' } });
    expect(readPrediction({ prediction: { ...banded, band_source: { kind: 'guess' } } })).toMatchObject({ bandLo: null, band: null });
  });

  it('leaves Space to word fields only', () => {
    expect(isWordField({ tagName: 'INPUT', type: 'text' } as unknown as EventTarget)).toBe(true);
    expect(isWordField({ tagName: 'TEXTAREA' } as unknown as EventTarget)).toBe(true);
    expect(isWordField({ tagName: 'INPUT', type: 'number' } as unknown as EventTarget)).toBe(false);
    expect(isWordField({ tagName: 'BUTTON', isContentEditable: false } as unknown as EventTarget)).toBe(false);
    expect(isWordField({ tagName: 'DIV', isContentEditable: true } as unknown as EventTarget)).toBe(true);
    expect(isWordField(null)).toBe(false);
  });
});

describe('thrust per watt while the throttle ramps', () => {
  it('marks points within TRANSIENT_MS of an output change as not steady, and leaves out rows below the power floor', () => {
    // Output steps from 0.3 to 0.5 at t = 1000 ms; thrust and power every 100 ms.
    const rows: Record<string, number | null>[] = [];
    for (let t = 0; t <= 3000; t += 100) rows.push({ t, power: t === 2500 ? MIN_EFFICIENCY_POWER_W / 2 : 60, thrust: 3, out: t < 1000 ? 0.3 : 0.5 });
    const b = batch(rows.map((r) => ({ t: r.t!, power: r.power!, thrust: r.thrust! })));
    b.out = rows.map((r) => r.out);
    const ring = new SampleRing(100);
    ring.append(b);
    const p = efficiencyPoints(ring.t, ring.ch.thrust, ring.ch.power, ring, 0, ring.length, ring.ch.out);
    const at = (t: number) => p.steady[rows.filter((r) => r.t! <= t && r.t !== 2500).length - 1];
    // no change seen yet at the start: steady; the step at 1000 ms: not steady until 1000 + TRANSIENT_MS
    expect(at(900)).toBe(true);
    expect(at(1000)).toBe(false);
    expect(at(1000 + TRANSIENT_MS - 100)).toBe(false);
    expect(at(1000 + TRANSIENT_MS)).toBe(true);
    // the row at 2500 ms (power below the floor) made no point
    expect(p.thrustN.length).toBe(rows.length - 1);
  });
});
