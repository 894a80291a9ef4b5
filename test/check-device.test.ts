// The device checker against boards that keep their own wall-clock time in processes of their own: the virtual
// bench behind a pty (good, with auto-reset, and broken in one way each), and the host build of the reference
// firmware, which we did not write in TypeScript and which shares no code with the checker but the protocol
// table. A good board passes every check; each broken one fails, with the PROTOCOL.md section of its fault.

import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, afterEach, describe, expect, it } from 'vitest';
import { checkDevice, formatReport, sectionAnchor, SECTIONS, type CheckReport, type Section } from '../server/checker/check-device.js';
import { openPtyPair, socatPath, type PtyPair } from '../server/link/pty-pair.js';
import { SerialTransport } from '../server/link/serial-transport.js';
import type { FirmwareBug } from '../server/sim/index.js';
import { runCli, SimProcess } from './helpers/sim-process.js';

const haveSocat = socatPath() !== null;
const sims: SimProcess[] = [];
afterEach(async () => {
  for (const s of sims.splice(0)) await s.close();
});

async function checkSim(opts: Parameters<typeof SimProcess.start>[0] = {}): Promise<CheckReport> {
  const sim = await SimProcess.start({ seed: 7, ...opts });
  sims.push(sim);
  return checkDevice({ transport: () => new SerialTransport(sim.devicePath, 115200) });
}

function failed(r: CheckReport): { id: string; section: Section }[] {
  return r.checks.filter((c) => !c.pass).map((c) => ({ id: c.id, section: c.section }));
}

describe.skipIf(!haveSocat)('device checker on good boards', () => {
  it('passes the virtual bench in its own process, and measures a heartbeat cut near the announced 300 ms', async () => {
    const r = await checkSim();
    expect(failed(r), formatReport(r)).toEqual([]);
    expect(r.pass).toBe(true);
    expect(r.firmware).toMatch(/^vbench /);
    expect(r.checks.length).toBeGreaterThanOrEqual(30);
    // Every check names a section that exists in PROTOCOL.md.
    for (const c of r.checks) expect(SECTIONS).toContain(c.section);
    expect(r.measured.heartbeat_cut_ms).toBeGreaterThanOrEqual(285);
    expect(r.measured.stat_gap_ms).toBeLessThanOrEqual(260);
  }, 60_000);

  it('passes a board that resets whenever its port opens and boots for 1.5 s, and sees the restart', async () => {
    const r = await checkSim({ resetOnOpenMs: 1500 });
    expect(failed(r), formatReport(r)).toEqual([]);
    const reopen = r.checks.find((c) => c.id === 'reopen')!;
    expect(reopen.detail).toMatch(/restarted on open \(boot=reset, STAT fault=reset\)/);
    const hs = r.checks.find((c) => c.id === 'handshake')!;
    // The first HELLOs went to the bootloader: the answer came only after the 1.5 s boot.
    expect(Number(/answered in (\d+) ms/.exec(hs.detail)![1])).toBeGreaterThanOrEqual(1500);
  }, 60_000);

  it('passes a board announcing a 100 ms heartbeat time-out: heartbeats every 25 ms keep it alive, the cut comes near 100 ms', async () => {
    const r = await checkSim({ rigSim: { heartbeat_timeout_ms: 100 } });
    expect(failed(r), formatReport(r)).toEqual([]);
    expect(r.measured.heartbeat_cut_ms).toBeGreaterThanOrEqual(85);
    expect(r.measured.heartbeat_cut_ms).toBeLessThanOrEqual(250);
  }, 60_000);
});

describe.skipIf(!haveSocat)('device checker on broken boards, one fault each', () => {
  // Each fake differs from the good virtual bench by one fault; the check that must catch it and its section.
  const cases: [what: string, opts: { bugs?: FirmwareBug[]; rigSim?: Record<string, unknown> }, check: string, section: Section][] = [
    ['an IDENT that does not copy the nonce', { bugs: ['noNonceEcho'] }, 'handshake', 'Handshake'],
    ['ARM carried out before any handshake', { bugs: ['noHandshakeNeeded'] }, 'not-ready', 'Handshake'],
    ['a THR above the ceiling clamped instead of refused', { bugs: ['clampAboveCeiling'] }, 'ceiling', 'Safety guarantees of the firmware'],
    ['not_armed given before above_ceiling', { bugs: ['notArmedFirst'] }, 'order-ceiling-first', 'Refusals and their order'],
    ['a new fault replacing the latched one', { bugs: ['latchReplaced'] }, 'first-fault-kept', 'Safety guarantees of the firmware'],
    ['STOP that latches nothing', { bugs: ['stopNoLatch'] }, 'stop', 'Safety guarantees of the firmware'],
    ['heartbeat loss never acted on', { bugs: ['ignoreHeartbeat'] }, 'heartbeat-cut', 'Heartbeat'],
    ['heartbeat loss acted on three time-outs late', { bugs: ['lateHeartbeatCut'] }, 'heartbeat-cut', 'Heartbeat'],
    ['STAT only once a second', { bugs: ['slowStat'] }, 'stat-interval', 'Telemetry'],
    ['numbers sent without their declared decimals', { bugs: ['shortNumbers'] }, 'numbers-out', 'Framing'],
    ['declared rates that 115200 baud cannot carry', { rigSim: { voltage_rate_hz: 1000, current_rate_hz: 1000 } }, 'budget', 'Telemetry'],
  ];
  for (const [what, opts, check, section] of cases) {
    it(`fails ${what}, naming ${section}`, async () => {
      const r = await checkSim(opts);
      expect(r.pass).toBe(false);
      const f = failed(r);
      expect(f, formatReport(r)).toContainEqual({ id: check, section });
      expect(formatReport(r)).toContain(sectionAnchor(section));
    }, 60_000);
  }
});

// ---------------------------------------------------------------- the reference firmware, host build

const fwDir = fileURLToPath(new URL('../firmware-protocol/firmware/', import.meta.url));
const gxx = ['/usr/bin/g++', '/usr/bin/c++'].find((p) => existsSync(p));
let buildDir: string | null = null;

function buildReference(): string {
  buildDir = mkdtempSync(join(tmpdir(), 'ductbench-fwcheck-'));
  const out = join(buildDir, 'fw-host');
  const core = spawnSync('sh', ['-c', `ls ${fwDir}core/*.cpp ${fwDir}host/*.cpp`], { encoding: 'utf8' }).stdout.trim().split('\n');
  const r = spawnSync(gxx!, ['-std=c++17', '-O1', '-o', out, ...core], { encoding: 'utf8', timeout: 240_000 });
  if (r.status !== 0) throw new Error(`the host firmware did not build: ${r.stderr}`);
  return out;
}

afterAll(() => {
  if (buildDir) rmSync(buildDir, { recursive: true, force: true });
});

describe.skipIf(!haveSocat || !gxx)('device checker on the reference firmware (host build)', () => {
  let pair: PtyPair | null = null;
  let child: ChildProcess | null = null;
  afterEach(async () => {
    if (child && child.exitCode === null) {
      const gone = new Promise((r) => child!.once('exit', r));
      child.kill('SIGTERM');
      await gone;
    }
    child = null;
    await pair?.close();
    pair = null;
  });

  it('passes every check, through the CLI (exit 0) and in JSON', async () => {
    const bin = buildReference();
    pair = await openPtyPair();
    child = spawn(bin, [pair.b], { stdio: ['ignore', 'ignore', 'pipe'] });
    await new Promise((r) => setTimeout(r, 200));
    const cli = await runCli(['check-device', '--port', pair.a, '--json'], 90_000);
    const report = JSON.parse(cli.stdout) as CheckReport;
    expect(failed(report), formatReport(report)).toEqual([]);
    expect(cli.code).toBe(0);
    expect(report.firmware).toMatch(/\+host$/);
    expect(cli.stderr).toMatch(/propeller must be off/);
  }, 180_000);
});
