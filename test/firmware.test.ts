// The reference firmware (firmware-protocol/firmware): first its own C++ tests (test.sh builds the core with
// g++, plain and sanitized, and runs it against the shared conformance vectors), then the host build of the
// same core run as a process behind a real pseudo-terminal: the daemon handshakes with it, the firmware
// refuses arming at non-zero throttle and throttle above its ceiling, and it cuts the output itself when
// the heartbeat stops. What the "ESC" received is read from the binary's own stderr (every pulse change is
// logged there with the device clock), not inferred from the protocol.

import { spawn, spawnSync, type ChildProcess } from 'node:child_process';
import { existsSync, readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { SerialPort } from 'serialport';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { decodeLine, encodeLine } from '../firmware-protocol/src/codec.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import type { DeviceFrame, FieldsOf, HostCommandTag } from '../firmware-protocol/src/messages.js';
import { startDaemon } from '../server/daemon.js';
import { CommandRefused } from '../server/link/link.js';
import { openPtyPair, type PtyPair } from '../server/link/pty-pair.js';

const fwDir = fileURLToPath(new URL('../firmware-protocol/firmware/', import.meta.url));
const hostBinary = `${fwDir}build/ductbench-fw-host`;
const vectors = JSON.parse(readFileSync(fileURLToPath(new URL('../firmware-protocol/vectors/v1.json', import.meta.url)), 'utf8')) as {
  valid: unknown[];
  invalid: unknown[];
};

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  for (const c of cleanups.splice(0).reverse()) await c();
});

/** Polls `cond` until it holds; generous by default for a loaded 2-core machine. */
async function until(cond: () => boolean, timeoutMs: number, what: string): Promise<void> {
  const t0 = Date.now();
  while (!cond()) {
    if (Date.now() - t0 > timeoutMs) throw new Error(`timed out waiting for ${what}`);
    await new Promise((r) => setTimeout(r, 10));
  }
}

/** The host firmware as a child process on one end of a pty pair; its stderr debug lines are collected. */
class FirmwareProcess {
  readonly stderr: string[] = [];
  private partial = '';
  constructor(readonly child: ChildProcess) {
    child.stderr!.on('data', (d: Buffer) => {
      const text = this.partial + d.toString('latin1');
      const parts = text.split('\n');
      this.partial = parts.pop() ?? '';
      this.stderr.push(...parts);
    });
  }
  static async start(pair: PtyPair, args: string[] = []): Promise<FirmwareProcess> {
    const child = spawn(hostBinary, [...args, pair.b], { stdio: ['ignore', 'ignore', 'pipe'] });
    const fp = new FirmwareProcess(child);
    cleanups.push(() => fp.stop());
    await until(() => fp.stderr.some((l) => l.includes('boot:')), 10_000, 'the host firmware to boot');
    return fp;
  }
  /** ESC writes logged so far, in order: pulse width in us, 0 for "held low", with the device time. */
  escLog(): { t: number; us: number }[] {
    const out: { t: number; us: number }[] = [];
    for (const l of this.stderr) {
      const p = /^fwhost t=(\d+) esc pulse us: (\d+)$/.exec(l);
      if (p) out.push({ t: Number(p[1]), us: Number(p[2]) });
      const low = /^fwhost t=(\d+) esc line held low$/.exec(l);
      if (low) out.push({ t: Number(low[1]), us: 0 });
    }
    return out;
  }
  lastEsc(): number | undefined {
    return this.escLog().at(-1)?.us;
  }
  stop(): Promise<void> {
    return new Promise((resolve) => {
      if (this.child.exitCode !== null || this.child.signalCode !== null) return resolve();
      this.child.once('exit', () => resolve());
      this.child.kill('SIGTERM'); // our own child, by its pid
    });
  }
}

/** A raw serial port speaking protocol lines, for what the daemon's own guards would never send. */
class RawHost {
  readonly frames: DeviceFrame[] = [];
  private seq = 0;
  private readonly splitter = new LineSplitter((line) => {
    const r = decodeLine(line, 'd2h');
    if (r.ok) this.frames.push(r as unknown as DeviceFrame);
  });
  private constructor(readonly port: SerialPort) {
    port.on('data', (d: Buffer) => this.splitter.push(d));
  }
  static async open(path: string): Promise<RawHost> {
    const port = new SerialPort({ path, baudRate: 115200, autoOpen: false, hupcl: false });
    await new Promise<void>((res, rej) => port.open((e) => (e ? rej(e) : res())));
    const h = new RawHost(port);
    cleanups.push(() => new Promise<void>((r) => (port.isOpen ? port.close(() => r()) : r())));
    return h;
  }
  send<M extends HostCommandTag>(tag: M, fields: FieldsOf<M>): number {
    const seq = this.seq++;
    this.port.write(encodeLine(tag, seq, fields));
    return seq;
  }
  /** Sends an acknowledged command and resolves with 'ack' or the NAK reason. */
  async command<M extends HostCommandTag>(tag: M, fields: FieldsOf<M>): Promise<string> {
    const seq = this.send(tag, fields);
    let answer: string | null = null;
    await until(
      () => {
        for (const f of this.frames) {
          if (f.tag === 'ACK' && f.fields.ref === seq) answer = 'ack';
          if (f.tag === 'NAK' && f.fields.ref === seq) answer = f.fields.why;
        }
        return answer !== null;
      },
      5000,
      `answer to ${tag}`,
    );
    return answer!;
  }
  lastStat(): Extract<DeviceFrame, { tag: 'STAT' }> | undefined {
    for (let i = this.frames.length - 1; i >= 0; i--) {
      const f = this.frames[i];
      if (f.tag === 'STAT') return f;
    }
    return undefined;
  }
}

let build: { status: number | null; out: string } = { status: null, out: '' };

beforeAll(() => {
  const r = spawnSync('bash', [`${fwDir}test.sh`], { encoding: 'utf8', timeout: 300_000 });
  build = { status: r.status, out: `${r.stdout}\n${r.stderr}${r.error ? `\n${r.error.message}` : ''}` };
}, 320_000);

describe('reference firmware: C++ tests', () => {
  it('test.sh builds the core with g++ and passes its tests and every conformance vector, also sanitized', () => {
    expect(build.out).not.toContain('FAILED');
    expect(build.status, build.out).toBe(0);
    // Both runs (plain and sanitized) end with the closing line, no failures.
    const closings = [...build.out.matchAll(/^firmware: (\d+) passed, (\d+) failed$/gm)];
    expect(closings.length).toBe(2);
    for (const m of closings) {
      expect(Number(m[1])).toBeGreaterThan(20);
      expect(Number(m[2])).toBe(0);
    }
    // Every vector in the shared file was judged, not a subset.
    expect(build.out).toContain(`vectors: ${vectors.valid.length} valid, ${vectors.invalid.length} invalid`);
    expect(existsSync(hostBinary)).toBe(true);
  });
});

describe('reference firmware behind a pseudo-terminal', () => {
  it('the daemon handshakes with it; it refuses arming at non-zero throttle and throttle above its ceiling', async () => {
    expect(existsSync(hostBinary), build.out).toBe(true);
    const pair = await openPtyPair();
    cleanups.push(() => pair.close());
    const fw = await FirmwareProcess.start(pair);
    const d = await startDaemon({ source: { kind: 'serial', path: pair.a }, httpPort: 0, log: () => {} });
    cleanups.push(() => d.close());
    await d.firstConnect;
    expect(d.link.isReady).toBe(true);
    const id = d.link.identity!;
    expect(id.firmware).toBe('ductbench-ref');
    expect(id.firmwareVersion).toBe('1.0.0+host');
    expect(id.channels.thrust).toBe(80);
    expect(id.throttleCeiling).toBe(0.8);
    expect(id.heartbeatTimeoutMs).toBeLessThanOrEqual(300);

    await d.controller.arm();
    await d.controller.setThrottle(0.5);
    await until(() => fw.lastEsc() === 1500, 5000, 'the ESC at 1500 us');
    // Thrust from the simulated plant arrives through the daemon.
    let thrust = 0;
    const off = d.onSample((s) => {
      if (s.thrust !== null) thrust = s.thrust;
    });
    cleanups.push(off);
    await until(() => thrust > 1, 10_000, 'thrust above 1 N');

    // Straight to the link, past the controller's own guards: the firmware must refuse by itself.
    const above = await d.link.command('THR', { v: 0.95 }).then(
      () => 'ack',
      (e: unknown) => (e instanceof CommandRefused ? e.message : String(e)),
    );
    expect(above).toMatch(/above_ceiling/);
    const armAgain = await d.link.command('ARM', {}).then(
      () => 'ack',
      (e: unknown) => (e instanceof CommandRefused ? e.message : String(e)),
    );
    expect(armAgain).toMatch(/throttle_not_zero/);
    // Refused means unchanged: the ESC never left 1500 us.
    expect(fw.escLog().filter((e) => e.us > 1500)).toEqual([]);
    expect(fw.lastEsc()).toBe(1500);
    expect(d.link.view().linesBad).toEqual({});
  });

  it('arming is refused while the throttle is non-zero, and the ceiling holds, over a raw port', async () => {
    expect(existsSync(hostBinary), build.out).toBe(true);
    const pair = await openPtyPair();
    cleanups.push(() => pair.close());
    const fw = await FirmwareProcess.start(pair, ['--sps', '10']);
    const host = await RawHost.open(pair.a);
    const hb = setInterval(() => host.send('HB', {}), 100);
    cleanups.push(() => clearInterval(hb));
    host.send('HELLO', { proto: 1, host: 'fwtest' });
    await until(() => host.frames.some((f) => f.tag === 'IDENT'), 5000, 'IDENT');
    const ident = host.frames.find((f) => f.tag === 'IDENT')!;
    // The bridge ADC's RATE pin choice (10 or 80 samples/s, its datasheet) is what IDENT announces.
    expect(ident.tag === 'IDENT' && ident.fields.caps).toContain('thrust@10');
    expect(await host.command('THR', { v: 0.2 })).toBe('not_armed');
    expect(await host.command('ARM', {})).toBe('ack');
    expect(await host.command('THR', { v: 0.25 })).toBe('ack');
    expect(await host.command('ARM', {})).toBe('throttle_not_zero');
    expect(await host.command('THR', { v: 0.81 })).toBe('above_ceiling');
    expect(await host.command('THR', { v: 0.8 })).toBe('ack');
    await until(() => fw.lastEsc() === 1800, 5000, 'the ESC at 1800 us');
    expect(fw.escLog().some((e) => e.us === 1810)).toBe(false); // 0.81 never reached the ESC, not even clamped
    expect(await host.command('STOP', {})).toBe('ack');
    await until(() => fw.lastEsc() === 1000, 2000, 'the stop pulse');
    expect(host.lastStat()?.fields.fault).toBe('estop');
  });

  it('when the heartbeat stops the firmware writes the stop pulse itself within the time-out, then holds the line low', async () => {
    expect(existsSync(hostBinary), build.out).toBe(true);
    const pair = await openPtyPair();
    cleanups.push(() => pair.close());
    const fw = await FirmwareProcess.start(pair);
    const host = await RawHost.open(pair.a);
    const hb = setInterval(() => host.send('HB', {}), 100);
    cleanups.push(() => clearInterval(hb));
    host.send('HELLO', { proto: 1 });
    await until(() => host.lastStat()?.fields.hbok === true, 5000, 'handshake');
    expect(await host.command('ARM', {})).toBe('ack');
    expect(await host.command('THR', { v: 0.4 })).toBe('ack');
    await until(() => fw.lastEsc() === 1400, 5000, 'the ESC at 1400 us');

    clearInterval(hb); // the host dies: no STOP, no DISARM, just silence
    await until(() => host.lastStat()?.fields.fault === 'heartbeat', 5000, 'STAT fault=heartbeat');
    const stat = host.lastStat()!;
    expect(stat.fields).toMatchObject({ armed: false, out: 0, fault: 'heartbeat', hbok: false });
    // The firmware's own account, in its own clock: lost after more than the 300 ms time-out (and not much
    // later: the 1 ms loop only has to notice), and the stop pulse written in the same pass.
    const lost = fw.stderr.map((l) => /^fwhost t=(\d+) heartbeat lost, us since last HB: (\d+)$/.exec(l)).find((m) => m);
    expect(lost).toBeTruthy();
    const lostAt = Number(lost![1]);
    const since = Number(lost![2]);
    expect(since).toBeGreaterThan(300_000);
    expect(since).toBeLessThan(1_000_000); // generous: a loaded machine may delay a pass, never skip the check
    const after = fw.escLog().filter((e) => e.t >= lostAt);
    expect(after[0]).toEqual({ t: lostAt, us: 1000 });
    // Then the line is held low: no stale pulse for the ESC to keep obeying.
    await until(() => fw.lastEsc() === 0, 5000, 'the ESC line held low');
    const low = fw.escLog().at(-1)!;
    expect(low.t - lostAt).toBeGreaterThanOrEqual(500_000);
    // And it stays latched: a heartbeat coming back does not re-arm anything.
    host.send('HB', {});
    expect(await host.command('ARM', {})).toBe('latched');
    expect(fw.lastEsc()).toBe(0);
  });
});
