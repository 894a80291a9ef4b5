// The dashboard's WebSocket path to arming and to sequences, against the daemon on the in-process virtual
// bench: the pre-arm checklist gate (arm and sequence_start refused until every item is confirmed), sequence
// refusals with field-level issues before anything spins, one run at a time, progress, points, the run in a
// reconnecting dashboard's snapshot, abort, and the managed session the run is recorded as.

import { mkdtemp, rm } from 'node:fs/promises';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { CHECKLIST_IDS, type ChecklistView, type ExampleSequence, type RunPointView, type SequenceRunView, type ServerMessage } from '../server/api/messages.js';
import { startDaemon, type RunningDaemon } from '../server/daemon.js';
import { TestClient } from './helpers/ws-client.js';

let d: RunningDaemon;
let dir: string;
const clients: TestClient[] = [];
/** The controlling dashboard, for the whole file (the first to connect holds the role while it stays). */
let ctl: TestClient;

beforeAll(async () => {
  dir = await mkdtemp(join(tmpdir(), 'ductbench-seq-'));
  d = await startDaemon({ source: { kind: 'sim', seed: 11 }, httpPort: 0, dataDir: dir, log: () => {} });
  await d.firstConnect;
  ctl = await client();
});
afterAll(async () => {
  for (const c of clients) c.close();
  await d?.close();
  await rm(dir, { recursive: true, force: true });
});

/** A further dashboard: a viewer while ctl is connected. */
async function client(): Promise<TestClient> {
  const c = await TestClient.connect(d.port, d.token);
  clients.push(c);
  return c;
}

type Reply = Extract<ServerMessage, { type: 'reply' }>;
/** Sends and returns the whole reply (TestClient.command keeps only ok/error). */
async function request(c: TestClient, msg: Record<string, unknown>): Promise<Reply> {
  const id = 1000 + c.messages.length + Math.floor(Math.random() * 1e6);
  c.ws.send(JSON.stringify({ ...msg, id }));
  let r: Reply | undefined;
  await c.until(() => (r = c.messages.find((m): m is Reply => m.type === 'reply' && m.id === id)) !== undefined, 10_000, `reply to ${String(msg.type)}`);
  return r!;
}

/** Run views of one run, from the messages after mark. */
function runViews(c: TestClient, mark: number, run: number): SequenceRunView[] {
  return c.messages
    .slice(mark)
    .filter((m): m is Extract<ServerMessage, { type: 'run' }> => m.type === 'run' && m.run.run === run)
    .map((m) => m.run);
}

async function startRun(c: TestClient, source: Record<string, unknown>, extra: Record<string, unknown> = {}): Promise<{ run: SequenceRunView; mark: number }> {
  const mark = c.messages.length;
  const r = await request(c, { type: 'sequence_start', source, ...extra });
  expect(r, JSON.stringify(r)).toMatchObject({ ok: true });
  return { run: (r as { data?: SequenceRunView }).data!, mark };
}

const staircase = { kind: 'staircase', start: 0.3, stop: 0.4, step: 0.1, hold_s: 1, window_s: 0.5, ramp_s: 0.5 };

describe('pre-arm checklist', () => {
  it('refuses arm and sequences until every item is confirmed, then allows them', async () => {
    const c = ctl;
    expect((c.snapshot!.extras.checklist as ChecklistView).confirmed).toBe(false);
    const arm = await c.command({ type: 'arm' });
    expect(arm.ok).toBe(false);
    expect(arm.error).toMatch(/checklist/);
    const seq = await request(c, { type: 'sequence_start', source: staircase });
    expect(seq).toMatchObject({ ok: false, error: expect.stringMatching(/checklist/) });
    expect(d.controller.state).toBe('safe');
    expect(d.sim!.state.armed).toBe(false);

    // one item short is refused and named; an unknown or repeated id is a schema error
    const short = await c.command({ type: 'checklist', items: CHECKLIST_IDS.slice(1) as never });
    expect(short.ok).toBe(false);
    expect(short.error).toContain(CHECKLIST_IDS[0]);
    expect((await request(c, { type: 'checklist', items: [...CHECKLIST_IDS, 'coffee'] })).ok).toBe(false);
    expect((await request(c, { type: 'checklist', items: [CHECKLIST_IDS[0], CHECKLIST_IDS[0]] })).ok).toBe(false);
    expect((await request(c, { type: 'checklist', items: 'all' })).ok).toBe(false);
    expect((await c.command({ type: 'arm' })).ok).toBe(false);

    // a viewer cannot confirm it for the controller
    const v = await client();
    expect(v.snapshot!.role).toBe('viewer');
    expect((await v.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).error).toMatch(/viewer/);

    expect((await c.command({ type: 'checklist', items: [...CHECKLIST_IDS] })).ok).toBe(true);
    // every dashboard hears of it
    await v.until(() => v.messages.some((m) => m.type === 'extras' && (m.extras.checklist as ChecklistView | undefined)?.confirmed === true), 5000, 'checklist extras');
    expect((await c.command({ type: 'arm' })).ok).toBe(true);
    await c.until(() => c.bench.state === 'armed', 5000, 'armed');
    expect((await c.command({ type: 'disarm' })).ok).toBe(true);
    await c.until(() => c.bench.state === 'safe', 5000, 'safe again');
    v.close();
  });
});

describe('sequences from the dashboard', () => {
  it('lists the shipped examples in the snapshot', async () => {
    const c = ctl;
    const list = c.snapshot!.extras.sequences as ExampleSequence[];
    expect(list.map((e) => e.name)).toContain('quick-check');
    const q = list.find((e) => e.name === 'quick-check')!;
    expect(q.steps).toBe(q.throttles.length);
  });

  it('refuses a sequence above the ceiling, a bad document and an unknown example with field-level issues, arming nothing', async () => {
    const c = ctl;
    const ceiling = d.controller.view().ceiling;
    const over = await request(c, { type: 'sequence_start', source: { ...staircase, stop: Math.min(1, ceiling + 0.05), start: ceiling - 0.05, step: 0.05 } });
    expect(over.ok).toBe(false);
    if (over.ok) return;
    expect(over.issues?.length).toBeGreaterThan(0);
    expect(over.issues!.some((i) => /ceiling/.test(i.rule))).toBe(true);
    const bad = await request(c, { type: 'sequence_start', source: { kind: 'json', text: JSON.stringify({ name: 'x', steps: [{ throttle: 0.2, hold: 3 }] }) } });
    expect(bad).toMatchObject({ ok: false, issues: [expect.objectContaining({ path: 'steps[0].hold' })] });
    const notJson = await request(c, { type: 'sequence_start', source: { kind: 'json', text: '{"name": ' } });
    expect(notJson).toMatchObject({ ok: false, issues: [expect.objectContaining({ rule: expect.stringMatching(/JSON/) })] });
    const unknown = await request(c, { type: 'sequence_start', source: { kind: 'example', name: 'no-such-thing' } });
    expect(unknown).toMatchObject({ ok: false, issues: [expect.objectContaining({ path: 'source.name' })] });
    // schema errors of the message itself
    expect(await request(c, { type: 'sequence_start', source: { kind: 'example', name: '../../etc/passwd' } })).toMatchObject({ ok: false });
    expect(await request(c, { type: 'sequence_start', source: { kind: 'staircase', start: 0.1 } })).toMatchObject({ ok: false, error: expect.stringMatching(/stop is required/) });
    expect(await request(c, { type: 'sequence_start', source: { ...staircase, hold_s: '1' } })).toMatchObject({ ok: false, error: expect.stringMatching(/hold_s/) });
    expect(await request(c, { type: 'sequence_start', source: staircase, extra: 1 })).toMatchObject({ ok: false, error: expect.stringMatching(/unknown key/) });
    expect(d.sim!.state.armed).toBe(false);
    expect(d.sim!.state.commanded).toBe(0);
    expect(d.controller.state).toBe('safe');
    // a check alone answers with the plan and arms nothing
    const check = await request(c, { type: 'sequence_start', source: staircase, check_only: true });
    expect(check).toMatchObject({ ok: true, data: { steps: 2, throttles: [0.3, 0.4] } });
    expect(d.sim!.state.armed).toBe(false);
  });

  it('runs a staircase: progress, points, one run at a time, the run in a new snapshot, a recorded session', async () => {
    const c = ctl;
    const { run: started, mark } = await startRun(c, staircase, { title: 'ws staircase', tags: ['ws-test'] });
    expect(started.session).not.toBeNull();
    // a second start while this one runs is refused
    const again = await request(c, { type: 'sequence_start', source: staircase });
    expect(again).toMatchObject({ ok: false, error: expect.stringMatching(/already running/) });
    // and so is a manual arm
    expect((await c.command({ type: 'arm' })).error).toMatch(/sequence/);

    const runs = () => runViews(c, mark, started.run);
    await c.until(() => runs().some((v) => v.progress.step === 2), 20_000, 'progress at step 2');
    const mid = runs().find((v) => v.state === 'measuring');
    expect(mid?.progress.steps).toBe(2);
    expect(mid?.progress.remaining_s).not.toBeNull();
    // a dashboard that connects mid-run sees the run, with the points so far
    const late = await client();
    expect(late.snapshot!.run).toMatchObject({ run: started.run, live: true });
    expect(Array.isArray(late.snapshot!.run!.points)).toBe(true);

    await c.until(() => runs().some((v) => v.outcome !== null), 30_000, 'run finished');
    const end = runs().find((v) => v.outcome !== null)!;
    expect(end, end.reason).toMatchObject({ outcome: 'completed', live: false });
    const points = c.messages
      .slice(mark)
      .filter((m): m is Extract<ServerMessage, { type: 'run_point' }> => m.type === 'run_point' && m.run === started.run)
      .map((m) => m.point as RunPointView);
    expect(points.map((p) => p.throttle)).toEqual([0.3, 0.4]);
    for (const p of points) {
      expect(p.channels.thrust!.mean).toBeGreaterThan(0);
      expect(p.grams_per_watt).toBeGreaterThan(0);
      // the model's predictor is wired as in `ductbench run`
      expect(p.predicted?.grams_per_watt).toBeGreaterThan(0);
      expect(Number.isFinite(p.deviation_pct)).toBe(true);
    }
    await c.until(() => c.bench.state === 'safe', 5000, 'safe after the run');

    // the session holds the run: title, tags, both points, outcome from the runner
    const res = await fetch(`http://127.0.0.1:${d.port}/api/sessions/${started.session}`, { headers: { authorization: `Bearer ${d.token}` } });
    const body = (await res.json()) as { session: { title: string; tags: string[]; outcome: string; points: unknown[]; sequence: unknown } };
    expect(body.session).toMatchObject({ title: 'ws staircase', tags: ['ws-test'], outcome: 'completed' });
    expect(body.session.points).toHaveLength(2);
    expect(body.session.sequence).toMatchObject({ steps: [{ staircase: { start: 0.3, stop: 0.4, step: 0.1 } }] });
    late.close();
  });

  it('pause disarms, resume goes on, abort ends the run as aborted', async () => {
    const c = ctl;
    const { run, mark } = await startRun(c, { kind: 'staircase', start: 0.2, stop: 0.4, step: 0.1, hold_s: 3, window_s: 1 });
    const runs = () => runViews(c, mark, run.run);
    await c.until(() => runs().some((v) => v.state === 'settling' || v.state === 'measuring'), 15_000, 'spinning');
    expect((await c.command({ type: 'sequence_pause' })).ok).toBe(true);
    await c.until(() => runs().some((v) => v.state === 'paused'), 10_000, 'paused');
    expect(d.sim!.state.armed).toBe(false);
    expect((await c.command({ type: 'sequence_pause' })).ok).toBe(false);
    expect((await c.command({ type: 'sequence_resume' })).ok).toBe(true);
    await c.until(() => runs().slice(-1)[0]?.state === 'ramping', 10_000, 'ramping after resume');
    expect(d.sim!.state.armed).toBe(true);
    expect((await c.command({ type: 'sequence_abort' })).ok).toBe(true);
    await c.until(() => runs().some((v) => v.outcome === 'aborted'), 10_000, 'aborted');
    await c.until(() => !d.sim!.state.armed, 5000, 'device disarmed');
    expect(d.sim!.state.output).toBe(0);
    expect((await c.command({ type: 'sequence_abort' })).error).toMatch(/no sequence/);
  });

  it('the stop button during a run cuts through the runner: the run ends as aborted', async () => {
    const c = ctl;
    if (d.controller.state === 'tripped') await d.controller.acknowledge();
    const { run, mark } = await startRun(c, staircase);
    const runs = () => runViews(c, mark, run.run);
    await c.until(() => d.sim!.state.output > 0.05, 15_000, 'spinning');
    expect((await c.command({ type: 'stop' })).ok).toBe(true);
    await c.until(() => d.sim!.state.output === 0, 2000, 'output cut');
    await c.until(() => runs().some((v) => v.outcome !== null), 5000, 'run over');
    expect(runs().find((v) => v.outcome !== null)!.outcome).toBe('aborted');
    // STOP latches the device (estop): the operator clears it
    await c.until(() => c.bench.state === 'tripped', 5000, 'estop latched');
    expect((await c.command({ type: 'clear' })).ok).toBe(true);
  });
});
