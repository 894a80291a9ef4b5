// Headless sweeps (`ductbench run --port`, the compiled CLI in its own process) on boards we did not write into
// the host: the virtual bench behind a pty in a process of its own, keeping wall-clock time, set up as an
// outside firmware would be: resetting when its port opens, staying powered between two runs, announcing a
// short heartbeat time-out, or left latched by a host that died. Each must complete its sweep (or, latched,
// be refused with its cause in JSON until the operator asks for the latch to be cleared).

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { socatPath } from '../server/link/pty-pair.js';
import { SerialTransport } from '../server/link/serial-transport.js';
import { Probe } from '../server/checker/probe.js';
import { runCli, SimProcess } from './helpers/sim-process.js';

const haveSocat = socatPath() !== null;
const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

async function board(opts: Parameters<typeof SimProcess.start>[0] = {}): Promise<SimProcess> {
  const sim = await SimProcess.start({ seed: 11, ...opts });
  cleanups.push(() => sim.close());
  return sim;
}

function dataDir(): string {
  const d = mkdtempSync(join(tmpdir(), 'ductbench-sweeps-'));
  cleanups.push(() => rmSync(d, { recursive: true, force: true }));
  return d;
}

interface RunJson {
  outcome: string;
  reason: string;
  points: unknown[];
  messages?: string[];
  device: { heartbeat_timeout_ms: number; heartbeat_interval_ms: number; boot_on_connect: string | null; line_budget: { fits: boolean } | null } | null;
  link: { lines_ok: number; lines_bad: Record<string, number>; lines_bad_total: number; seq_gaps: number; write_dropped: number } | null;
}

/** A short two-step sweep through the real serial path. */
async function sweep(port: string, dir: string, extra: string[] = []): Promise<{ code: number | null; out: RunJson; stderr: string }> {
  const r = await runCli(
    ['run', '--staircase', '0.2,0.3,0.1', '--hold', '3', '--ramp', '0.5', '--window', '0.5', '--port', port, '--yes-i-have-checked', '--data-dir', dir, '--json', ...extra],
    90_000,
  );
  let out: RunJson;
  try {
    out = JSON.parse(r.stdout) as RunJson;
  } catch {
    throw new Error(`run printed no JSON (exit ${r.code}): ${r.stdout}\n${r.stderr}`);
  }
  return { code: r.code, out, stderr: r.stderr };
}

describe.skipIf(!haveSocat)('sweeps on boards of their own', () => {
  it('a board that resets when its port opens and boots for 1.5 s: the handshake waits it out, the reset it caused is cleared, the sweep completes', async () => {
    const sim = await board({ resetOnOpenMs: 1500 });
    const r = await sweep(sim.devicePath, dataDir());
    expect(r.out.outcome, r.stderr).toBe('completed');
    expect(r.code).toBe(0);
    expect(r.out.points).toHaveLength(2);
    expect(r.out.device?.boot_on_connect).toBe('reset');
    expect(r.stderr).toMatch(/restarted when its port was opened \(auto-reset/);
    // Left as a completed sweep should leave it: disarmed, nothing latched, not expecting heartbeats.
    const st = await sim.until((s) => !s.handshaken, 5000, 'session ended with BYE');
    expect(st).toMatchObject({ armed: false, fault: 'none', output: 0 });
  }, 120_000);

  it('two sweeps in a row on one powered board: the first ends disarmed with BYE, not latched, so the second runs too', async () => {
    const sim = await board();
    const dir = dataDir();
    const first = await sweep(sim.devicePath, dir);
    expect(first.out.outcome, first.stderr).toBe('completed');
    // Long past the 300 ms heartbeat time-out with nobody connected: a BYE'd board latches nothing.
    await new Promise((r) => setTimeout(r, 800));
    const between = await sim.state();
    expect(between).toMatchObject({ armed: false, fault: 'none', handshaken: false });
    const transitions = await sim.transitions();
    expect(transitions.some((t) => /emergency stop/.test(t.reason))).toBe(false);
    const second = await sweep(sim.devicePath, dir);
    expect(second.out.outcome, second.stderr).toBe('completed');
    expect(second.code).toBe(0);
    // Link counters in the result and in each session.
    expect(second.out.link!.lines_ok).toBeGreaterThan(100);
    expect(second.out.link!.lines_bad_total).toBe(0);
    const shown = await runCli(['sessions', 'show', '2', '--data-dir', dir, '--json']);
    const session = JSON.parse(shown.stdout) as { events: { kind: string; data?: { lines_ok: number } }[] };
    const linkEvent = session.events.find((e) => e.kind === 'link');
    expect(linkEvent?.data?.lines_ok).toBeGreaterThan(100);
  }, 180_000);

  it('a board announcing a 100 ms heartbeat time-out gets a heartbeat every 25 ms and completes its sweep', async () => {
    const sim = await board({ rigSim: { heartbeat_timeout_ms: 100 } });
    const r = await sweep(sim.devicePath, dataDir());
    expect(r.out.outcome, r.stderr).toBe('completed');
    expect(r.out.device).toMatchObject({ heartbeat_timeout_ms: 100, heartbeat_interval_ms: 25 });
    expect(r.out.device?.line_budget?.fits).toBe(true);
    expect((await sim.state()).fault).toBe('none');
  }, 120_000);

  it('a board left latched by a host that died is refused with its cause in JSON, and runs once --clear-latch is given', async () => {
    const sim = await board();
    // A host that handshakes and dies: no BYE, so the board latches heartbeat loss 300 ms later.
    const probe = new Probe(() => new SerialTransport(sim.devicePath, 115200));
    await probe.open();
    await probe.send('HELLO', { proto: 1, nonce: 5 });
    await probe.waitFor((f) => f.tag === 'IDENT' && f.fields.nonce === 5, 3000);
    await probe.close();
    await sim.until((s) => s.fault === 'heartbeat', 5000, 'heartbeat latch');
    const dir = dataDir();
    const refused = await sweep(sim.devicePath, dir);
    expect(refused.code).toBe(2);
    expect(refused.out.outcome).toBe('refused');
    expect(refused.out.reason).toMatch(/latched \(heartbeat: No host heartbeat/);
    expect(refused.out.reason).toMatch(/--clear-latch/);
    expect((await sim.state()).fault).toBe('heartbeat');
    const cleared = await sweep(sim.devicePath, dir, ['--clear-latch']);
    expect(cleared.out.outcome, cleared.stderr).toBe('completed');
    expect(cleared.stderr).toMatch(/latched before this run \(heartbeat: .*clearing it as --clear-latch asks/);
  }, 180_000);
});
