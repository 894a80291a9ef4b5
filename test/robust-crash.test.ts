// A daemon killed with SIGKILL mid-sweep. The daemon is the compiled CLI in its own process, talking to the
// virtual bench behind a real pseudo-terminal (the bench runs in a third process and keeps its own clock, as
// a board on USB does). SIGKILL gives the daemon no chance to send STOP: only the firmware's heartbeat
// time-out can cut the output. The session it was recording must come back as interrupted when the store
// next opens. Needs dist/ (npm test builds first; alone: npx tsc -p tsconfig.json).

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { assertBuilt, DaemonProcess, runCli, SimProcess, waitFor } from './helpers/sim-process.js';
import { armFromDashboard } from './helpers/dashboard.js';
import { TestClient } from './helpers/ws-client.js';

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});
beforeAll(() => assertBuilt());

async function setUp(seed: number): Promise<{ sim: SimProcess; dir: string }> {
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-robust-crash-'));
  cleanups.push(() => rmSync(dir, { recursive: true, force: true }));
  const sim = await SimProcess.start({ seed, link: join(dir, 'tty') });
  cleanups.push(() => sim.close());
  return { sim, dir };
}

function daemon(args: string[], env: Record<string, string> = {}): DaemonProcess {
  const d = new DaemonProcess(args, env);
  cleanups.push(() => d.close());
  return d;
}

interface ListedSession {
  id: number;
  outcome: string;
  sample_count: number;
  ended_at: number | null;
}

async function listSessions(dir: string): Promise<ListedSession[]> {
  const r = await runCli(['sessions', 'list', '--data-dir', dir, '--json']);
  expect(r.code, r.stderr).toBe(0);
  return JSON.parse(r.stdout) as ListedSession[];
}

/** The firmware latched a heartbeat loss and its ESC output is at the stop value. */
async function heartbeatCut(sim: SimProcess): Promise<void> {
  const s = await sim.until((x) => x.fault === 'heartbeat', 10_000, 'heartbeat latch');
  expect(s.output).toBe(0);
  expect(s.armed).toBe(false);
  expect(s.mode).toBe('latched');
  expect(s.hbOk).toBe(false);
  const tr = await sim.transitions();
  const last = tr[tr.length - 1];
  expect(last.to).toBe('latched');
  expect(last.reason).toMatch(/heartbeat/);
}

describe('daemon killed with SIGKILL mid-sweep (bench behind a pty, daemon in its own process)', () => {
  it('`ductbench run`: the heartbeat time-out cuts the output and the session is interrupted on the next open', async () => {
    const { sim, dir } = await setUp(11);
    const run = daemon(['run', '--port', sim.devicePath, '--yes-i-have-checked', '--staircase', '0.2,0.5,0.1', '--hold', '4', '--ramp', '0.5', '--window', '1', '--json', '--data-dir', dir]);
    // Mid-sweep: the motor is turning under the run's command.
    let last = await sim.state();
    await waitFor(async () => (last = await sim.state()).output >= 0.15, 30_000, () => `output up (bench ${JSON.stringify(last)}; stderr: ${run.stderr})`);
    expect(last.armed).toBe(true);
    run.kill('SIGKILL');
    expect((await run.exited).signal).toBe('SIGKILL');
    // No JSON result: the process never got to the end.
    expect(run.stdout).toBe('');
    await heartbeatCut(sim);

    const sessions = await listSessions(dir);
    expect(sessions).toHaveLength(1);
    expect(sessions[0].outcome).toBe('interrupted');
    // The samples committed before the kill are kept.
    expect(sessions[0].sample_count).toBeGreaterThan(0);
    expect(sessions[0].ended_at).not.toBeNull();
    const shown = await runCli(['sessions', 'show', String(sessions[0].id), '--data-dir', dir, '--json']);
    expect(shown.code, shown.stderr).toBe(0);
    expect(shown.stdout).toMatch(/session interrupted: the recording process stopped/);
  });

  it('`ductbench serve` driven by a dashboard: the same cut and the same interrupted session', async () => {
    const { sim, dir } = await setUp(12);
    const token = 'robust-crash-token-9f2c';
    const serve = daemon(['serve', '--port', sim.devicePath, '--http-port', '0', '--data-dir', dir], { DUCTBENCH_TOKEN: token });
    const m = await serve.stdoutMatch(/dashboard: http:\/\/127\.0\.0\.1:(\d+)\//);
    const c = await TestClient.connect(Number(m[1]), token);
    // The socket is reset when the daemon dies; that is expected, not a test failure.
    c.ws.on('error', () => {});
    cleanups.push(() => c.ws.terminate());
    await armFromDashboard(c, 0.3);
    await sim.until((x) => x.output > 0.29, 10_000, 'output up');
    await c.until(() => c.samples.t.length > 20, 10_000, 'samples while running');
    serve.kill('SIGKILL');
    expect((await serve.exited).signal).toBe('SIGKILL');
    await heartbeatCut(sim);
    const sessions = await listSessions(dir);
    // Newest first. Earlier ones exist only if a loaded machine made an arming attempt trip (helpers/dashboard.ts).
    expect(sessions[0].outcome).toBe('interrupted');
    expect(sessions.slice(1).map((s) => s.outcome)).toEqual(sessions.slice(1).map(() => 'tripped'));
    expect(sessions[0].sample_count).toBeGreaterThan(0);
  });
});
