// Zero before every run, end to end on the in-process virtual bench (its load cell reads 0.8 N at rest with
// nothing on it, sim.thrust_offset_n): a sequence from the dashboard starts with a recorded zero and ends with
// the zero read again; thrust that is not steady at rest (the bench's stand_disturbance) refuses the start and
// a hand arm with the reason, arming nothing; keep_zero keeps the earlier zero and the session says so; a zero
// that creeps during the run (the bench's zero_shift) is recorded as drift, warned, and the session tagged.

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHECKLIST_IDS, type SequenceRunView, type ServerMessage, type ZeroView } from '../server/api/messages.js';
import { ZERO_DRIFT_TAG } from '../server/bench/zero-service.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { SIM_DEFAULTS } from '../server/sim/sim-constants.js';
import type { StoredEvent } from '../server/store/types.js';
import { TestClient } from './helpers/ws-client.js';

let d: RunningDaemon;
let dir: string;
let c: TestClient;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-zero-'));
  d = await startDaemon({ source: { kind: 'sim', seed: 5 }, httpPort: 0, dataDir: dir, log: () => {} });
  await d.firstConnect;
  c = await TestClient.connect(d.port, d.token);
  expect((await c.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).ok).toBe(true);
});
afterAll(async () => {
  c?.close();
  await d?.close();
  await rm(dir, { recursive: true, force: true });
});

type Reply = Extract<ServerMessage, { type: 'reply' }>;
async function request(msg: Record<string, unknown>): Promise<Reply> {
  const id = 5000 + c.messages.length + Math.floor(Math.random() * 1e6);
  c.ws.send(JSON.stringify({ ...msg, id }));
  let r: Reply | undefined;
  await c.until(() => (r = c.messages.find((m): m is Reply => m.type === 'reply' && m.id === id)) !== undefined, 15_000, `reply to ${String(msg.type)}`);
  return r!;
}

function zeroViews(mark = 0): ZeroView[] {
  return c.messages.slice(mark).flatMap((m) => (m.type === 'extras' && m.extras.zero ? [m.extras.zero as ZeroView] : []));
}

const staircase = { kind: 'staircase', start: 0.3, stop: 0.4, step: 0.1, hold_s: 1, window_s: 0.5, ramp_s: 0.5 };

/** Starts a run, waits for its end and for the zero to be read again; returns the run and its session's events. */
async function runToEnd(extra: Record<string, unknown> = {}, during?: () => void): Promise<{ run: SequenceRunView; events: StoredEvent[]; tags: string[] }> {
  const mark = c.messages.length;
  const r = await request({ type: 'sequence_start', source: staircase, ...extra });
  expect(r, JSON.stringify(r)).toMatchObject({ ok: true });
  const run = (r as { data?: SequenceRunView }).data!;
  if (during) {
    await c.until(() => d.sim!.state.output > 0.1, 15_000, 'spinning');
    during();
  }
  await c.until(() => c.messages.slice(mark).some((m) => m.type === 'run' && m.run.run === run.run && m.run.outcome !== null), 30_000, 'run over');
  await c.until(() => zeroViews(mark).some((z) => z.after?.session === run.session && z.after.state !== 'checking'), 15_000, 'zero read again');
  const res = await fetch(`http://127.0.0.1:${d.port}/api/sessions/${run.session}`, { headers: { authorization: `Bearer ${d.token}` } });
  const body = (await res.json()) as { session: { events: StoredEvent[]; tags: string[] } };
  return { run, events: body.session.events, tags: body.session.tags };
}

describe('zero before every run', () => {
  it('zeroes before a sequence: the offset is the bench\'s own, recorded in the session, and the zero read again after', async () => {
    expect((c.snapshot!.extras.zero as ZeroView).state).toBe('none');
    const { events, tags } = await runToEnd();
    const zero = events.find((e) => e.kind === 'zero')!;
    expect(zero, JSON.stringify(events.map((e) => e.kind))).toBeDefined();
    const data = zero.data as { mode: string; offset_N: number; previous_offset_N: number };
    expect(data.mode).toBe('tared');
    // The virtual bench's own offset (its truth, not ours), as read through the cell's 1.2 % gain error.
    expect(data.offset_N).toBeGreaterThan(SIM_DEFAULTS.thrust_offset_n * 0.95);
    expect(data.offset_N).toBeLessThan(SIM_DEFAULTS.thrust_offset_n * SIM_DEFAULTS.thrust_scale * 1.05);
    expect(data.previous_offset_N).toBe(0);
    // The bench's own drift (sim.thrust_drift_n_per_min, 0.004 N/min) is far inside 1 % of the range.
    const drift = events.find((e) => e.kind === 'zero_drift')!;
    expect(drift).toBeDefined();
    expect(drift.data).toMatchObject({ state: 'read', warned: false });
    expect(Math.abs((drift.data as { drift_N: number }).drift_N)).toBeLessThan(0.03);
    expect((drift.data as { range_N: number }).range_N).toBeGreaterThan(1);
    expect(tags).not.toContain(ZERO_DRIFT_TAG);
    // At rest now, the tared thrust reads about zero.
    const mark = c.samples.thrust.length;
    await c.until(() => c.samples.thrust.length > mark + 40, 5000, 'samples at rest');
    const rest = c.samples.thrust.slice(mark).filter((x): x is number => x !== null);
    expect(Math.abs(rest.reduce((a, b) => a + b, 0) / rest.length)).toBeLessThan(0.03);
  });

  it('refuses a sequence and a hand arm while the thrust at rest is not steady, arming nothing', async () => {
    const fault = d.sim!.injectFault('stand_disturbance', { amplitude_n: 0.3 });
    try {
      const seq = await request({ type: 'sequence_start', source: staircase });
      expect(seq.ok).toBe(false);
      if (seq.ok) return;
      expect(seq.error).toMatch(/not steady/);
      expect(seq.error).toMatch(/wind|draught/);
      expect(seq.error).toMatch(/touching the stand/);
      const arm = await request({ type: 'arm' });
      expect(arm).toMatchObject({ ok: false, error: expect.stringMatching(/arming refused: thrust at rest is not steady/) });
      expect(d.sim!.state.armed).toBe(false);
      expect(d.controller.state).toBe('safe');
      expect(d.zero.view().state).toBe('refused');
      // The zero in force is the last good one, not the swinging reading.
      expect(d.zero.view().offset_N).toBeGreaterThan(0.7);
    } finally {
      fault.clear();
    }
  });

  it('keeps the earlier zero when asked, and the session says so', async () => {
    const before = d.zero.view().offset_N;
    const { events } = await runToEnd({ keep_zero: true });
    const zero = events.find((e) => e.kind === 'zero')!;
    expect(zero.level).toBe('warn');
    expect(zero.text).toMatch(/zero kept by request/);
    expect(zero.data).toMatchObject({ mode: 'kept', offset_N: before });
    expect(d.zero.view().offset_N).toBe(before);
  });

  it('records a zero that crept during the run as drift, warns, and tags the session', async () => {
    const warnings = () => c.messages.filter((m) => m.type === 'event' && m.event.kind === 'zero_drift' && m.event.level === 'warn').length;
    const w0 = warnings();
    let shift: { clear(): void } | null = null;
    try {
      // 0.25 N: several percent of the run's thrust range.
      const { events, tags } = await runToEnd({}, () => (shift = d.sim!.injectFault('zero_shift', { shift_n: 0.25, ramp_ms: 500 })));
      const drift = events.find((e) => e.kind === 'zero_drift')!;
      expect(drift.level).toBe('warn');
      const data = drift.data as { state: string; drift_N: number; warned: boolean; fraction: number; limit_N: number };
      expect(data.state).toBe('read');
      expect(data.warned).toBe(true);
      // Read through the cell's own gain: 0.25 N of creep as the cell reports it, within its noise.
      expect(data.drift_N).toBeGreaterThan(0.2);
      expect(data.drift_N).toBeLessThan(0.3);
      expect(data.fraction).toBeGreaterThan(0.01);
      expect(tags).toContain(ZERO_DRIFT_TAG);
      expect(warnings()).toBeGreaterThan(w0);
    } finally {
      (shift as { clear(): void } | null)?.clear();
    }
  });

  it('refuses keep_zero of the wrong type', async () => {
    expect(await request({ type: 'arm', keep_zero: 'yes' })).toMatchObject({ ok: false, error: expect.stringMatching(/keep_zero/) });
  });
});
