// The virtual bench on a real pseudo-terminal: socat makes a linked pair of ptys, the bench opens one end
// with serialport (as the daemon opens a board), and the other end is handed out as the "device". The
// daemon, a serial terminal or any other tool can then open it and go through the operating system's tty
// layer exactly as with a microcontroller on USB. `simMain` is the body of `ductbench sim`.

import { spawn, type ChildProcess } from 'node:child_process';
import { existsSync, mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SerialPort } from 'serialport';
import { openPtyPair, PtyUnavailable, socatPath } from '../link/pty-pair.js';
import type { RigSpec } from '../model/rig-types.js';
import { VirtualBench, type VirtualBenchOptions } from './bench.js';
import { loadSimRig } from './rig-file.js';

export { PtyUnavailable };

export interface SimOnPtyOptions extends Omit<VirtualBenchOptions, 'output'> {
  /** Path of the device-side symlink to create (a private temp folder when left out). */
  link?: string;
  /**
   * Behave like a board with auto-reset (an Uno-class board whose serial adapter pulses the reset line when the
   * port is opened): every time a host opens the device the controller restarts and stays deaf for bootMs
   * (its bootloader), then boots with boot=reset. The bench stays powered between openings.
   */
  resetOnOpen?: { bootMs: number };
}

export interface SimOnPty {
  /** Open this as the serial port of the "microcontroller". */
  devicePath: string;
  bench: VirtualBench;
  /** Bytes the bench dropped because nobody was reading the device side (the pty buffer was full). */
  readonly droppedBytes: number;
  close(): Promise<void>;
}

/** Bytes allowed to wait in the serial library's queue; beyond it telemetry is dropped, as a USB device does. */
const MAX_PENDING_WRITE_BYTES = 64 * 1024;

export async function runSimOnPty(opts: SimOnPtyOptions = {}): Promise<SimOnPty> {
  if (opts.resetOnOpen) return runResettingSimOnPty(opts, opts.resetOnOpen.bootMs);
  const { link, ...benchOpts } = opts;
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-sim-'));
  const benchSide = join(dir, 'bench');
  const devicePath = link ?? join(dir, 'device');
  let pair: Awaited<ReturnType<typeof openPtyPair>>;
  try {
    pair = await openPtyPair({ a: devicePath, b: benchSide });
  } catch (e) {
    rmSync(dir, { recursive: true, force: true });
    throw e;
  }
  const port = new SerialPort({ path: benchSide, baudRate: 115200, autoOpen: false });
  try {
    await new Promise<void>((resolve, reject) => port.open((err) => (err ? reject(err) : resolve())));
  } catch (e) {
    await pair.close();
    rmSync(dir, { recursive: true, force: true });
    throw new Error(`cannot open the bench side of the pseudo-terminal: ${(e as Error).message}`);
  }
  const bench = new VirtualBench(benchOpts);
  let dropped = 0;
  // Until someone opens the device side, socat cannot deliver and the queue grows; a real board's USB stack
  // drops what the host does not fetch, and so does this.
  bench.setOutput((chunk) => {
    if (!port.isOpen) return;
    if (port.writableLength > MAX_PENDING_WRITE_BYTES) {
      dropped += chunk.length;
      return;
    }
    port.write(chunk, 'latin1');
  });
  port.on('data', (d: Buffer) => bench.receive(d));
  // A port error leaves the bench running without a host; heartbeat loss does the rest.
  port.on('error', () => {});
  bench.startRealtime();
  let closed = false;
  return {
    devicePath,
    bench,
    get droppedBytes() {
      return dropped;
    },
    async close() {
      if (closed) return;
      closed = true;
      bench.stopRealtime();
      bench.setOutput(null);
      if (port.isOpen) await new Promise<void>((resolve) => port.close(() => resolve()));
      await pair.close();
      rmSync(dir, { recursive: true, force: true });
    },
  };
}

/**
 * The auto-reset board. socat's wait-slave makes the bench's side of the pair appear only once a host has
 * opened the device side, and socat exits when that host closes it: each appearance is an opening (the reset
 * pulse), each exit a closing. Bytes the host sends while the bootloader runs are lost, as on the real board.
 */
async function runResettingSimOnPty(opts: SimOnPtyOptions, bootMs: number): Promise<SimOnPty> {
  const { link, resetOnOpen: _r, ...benchOpts } = opts;
  const socat = socatPath();
  if (!socat) throw new PtyUnavailable('socat not found: install it (Debian/Ubuntu: apt-get install socat) to use a pseudo-terminal');
  const dir = mkdtempSync(join(tmpdir(), 'ductbench-sim-'));
  const benchSide = join(dir, 'bench');
  const devicePath = link ?? join(dir, 'device');
  const bench = new VirtualBench(benchOpts);
  bench.startRealtime();
  let dropped = 0;
  let closed = false;
  let child: ChildProcess | null = null;
  let port: SerialPort | null = null;

  const session = (): Promise<void> =>
    new Promise((resolve) => {
      for (const p of [devicePath, benchSide]) if (existsSync(p)) rmSync(p, { force: true });
      // nonblock: a blocking write towards a pty nobody has open would hang socat before it sees the close.
      const c = spawn(socat, ['-d', '-d', `pty,raw,echo=0,link=${devicePath},wait-slave,nonblock`, `pty,raw,echo=0,link=${benchSide}`], { stdio: ['ignore', 'ignore', 'pipe'] });
      child = c;
      let log = '';
      let opened = false;
      c.stderr?.on('data', (d: Buffer) => {
        log += d.toString();
        // The host closed the port: socat reads end of file from its side (and, with the bench still writing,
        // would otherwise linger half-open). End this opening so the next one finds a fresh socat waiting.
        if (opened && log.includes('is at EOF')) {
          c.kill('SIGTERM');
          return;
        }
        if (opened || !log.includes('starting data transfer loop')) return;
        opened = true;
        // The host has just opened the port: the reset line pulses, the bootloader runs.
        bench.injectFault('reset', { down_ms: bootMs });
        const p = new SerialPort({ path: benchSide, baudRate: 115200, autoOpen: false });
        port = p;
        p.open((err) => {
          if (err) return;
          bench.setOutput((chunk) => {
            if (!p.isOpen) return;
            if (p.writableLength > MAX_PENDING_WRITE_BYTES) {
              dropped += chunk.length;
              return;
            }
            p.write(chunk, 'latin1');
          });
          p.on('data', (d: Buffer) => bench.receive(d));
        });
        p.on('error', () => {});
      });
      c.once('exit', () => {
        bench.setOutput(null);
        const p = port;
        port = null;
        if (p?.isOpen) p.close(() => resolve());
        else resolve();
      });
    });

  // Wait for the first socat to have made the device side, then keep one socat per opening.
  const first = session();
  const deadline = Date.now() + 5000;
  while (!existsSync(devicePath)) {
    if (Date.now() > deadline) {
      (child as ChildProcess | null)?.kill('SIGKILL');
      rmSync(dir, { recursive: true, force: true });
      throw new PtyUnavailable('socat did not create the pseudo-terminal in time');
    }
    await new Promise((r) => setTimeout(r, 10));
  }
  void (async () => {
    await first;
    while (!closed) await session();
  })();
  return {
    devicePath,
    bench,
    get droppedBytes() {
      return dropped;
    },
    async close() {
      if (closed) return;
      closed = true;
      bench.stopRealtime();
      bench.setOutput(null);
      const c = child as ChildProcess | null;
      if (c && c.exitCode === null) {
        const gone = new Promise((r) => c.once('exit', r));
        c.kill('SIGTERM');
        await gone;
      }
      rmSync(dir, { recursive: true, force: true });
    },
  };
}

export interface SimMainArgs {
  rigFile?: string;
  /** Device-side symlink path (default /tmp/ductbench-sim). */
  link?: string;
  seed?: number;
  /** Behave like a board with auto-reset: restart on every opening, deaf for this long (ms). */
  resetOnOpenMs?: number;
}

/** `ductbench sim`: prints the device path on stdout, runs until SIGINT or SIGTERM, then cleans up. */
export async function simMain(args: SimMainArgs): Promise<void> {
  const rig: RigSpec | undefined = args.rigFile ? loadSimRig(args.rigFile) : undefined;
  const sim = await runSimOnPty({
    link: args.link ?? '/tmp/ductbench-sim',
    ...(rig ? { rig } : {}),
    ...(args.seed !== undefined ? { seed: args.seed } : {}),
    ...(args.resetOnOpenMs !== undefined ? { resetOnOpen: { bootMs: args.resetOnOpenMs } } : {}),
  });
  process.stdout.write(sim.devicePath + '\n');
  process.stderr.write(`virtual bench "${sim.bench.rig.name}" ready on ${sim.devicePath} (Ctrl-C to stop)\n`);
  await new Promise<void>((resolve) => {
    const done = (): void => {
      process.off('SIGINT', done);
      process.off('SIGTERM', done);
      resolve();
    };
    process.on('SIGINT', done);
    process.on('SIGTERM', done);
    sim.bench.onError((e) => {
      process.stderr.write(`virtual bench stopped: ${e.message}\n`);
      process.exitCode = 1;
      done();
    });
  });
  await sim.close();
}
