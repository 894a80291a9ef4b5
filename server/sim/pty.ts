// The virtual bench on a real pseudo-terminal: socat makes a linked pair of ptys, the bench opens one end
// with serialport (as the daemon opens a board), and the other end is handed out as the "device". The
// daemon, a serial terminal or any other tool can then open it and go through the operating system's tty
// layer exactly as with a microcontroller on USB. `simMain` is the body of `ductbench sim`.

import { mkdtempSync, rmSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { SerialPort } from 'serialport';
import { openPtyPair, PtyUnavailable } from '../link/pty-pair.js';
import type { RigSpec } from '../model/rig-types.js';
import { VirtualBench, type VirtualBenchOptions } from './bench.js';
import { loadSimRig } from './rig-file.js';

export { PtyUnavailable };

export interface SimOnPtyOptions extends Omit<VirtualBenchOptions, 'output'> {
  /** Path of the device-side symlink to create (a private temp folder when left out). */
  link?: string;
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

export interface SimMainArgs {
  rigFile?: string;
  /** Device-side symlink path (default /tmp/ductbench-sim). */
  link?: string;
  seed?: number;
}

/** `ductbench sim`: prints the device path on stdout, runs until SIGINT or SIGTERM, then cleans up. */
export async function simMain(args: SimMainArgs): Promise<void> {
  const rig: RigSpec | undefined = args.rigFile ? loadSimRig(args.rigFile) : undefined;
  const sim = await runSimOnPty({
    link: args.link ?? '/tmp/ductbench-sim',
    ...(rig ? { rig } : {}),
    ...(args.seed !== undefined ? { seed: args.seed } : {}),
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
