// The virtual bench behind a pty, like runSimOnPty, but the test also holds the device side's port and can
// write any bytes into it: garbage, megabytes without a newline, noise between the bench's own lines. What a
// cheap USB adapter, a loose ground or the wrong baud rate does to a real serial line.

import { SerialPort } from 'serialport';
import { openPtyPair, type PtyPair } from '../../server/link/pty-pair.js';
import { VirtualBench } from '../../server/sim/index.js';

export interface RawPtyBench {
  /** Give this to the daemon as its serial port. */
  devicePath: string;
  bench: VirtualBench;
  /** Writes raw bytes towards the daemon, interleaved with the bench's own lines; resolves once drained. */
  writeRaw(data: Buffer | string): Promise<void>;
  close(): Promise<void>;
}

export async function rawPtyBench(opts: { seed?: number } = {}): Promise<RawPtyBench> {
  const pair: PtyPair = await openPtyPair();
  const port = new SerialPort({ path: pair.b, baudRate: 115200, autoOpen: false });
  try {
    await new Promise<void>((resolve, reject) => port.open((err) => (err ? reject(err) : resolve())));
  } catch (e) {
    await pair.close();
    throw e;
  }
  const bench = new VirtualBench({ seed: opts.seed ?? 1 });
  bench.setOutput((chunk) => {
    // As in runSimOnPty: what the host does not fetch is dropped, not queued without bound.
    if (port.isOpen && port.writableLength < 64 * 1024) port.write(chunk, 'latin1');
  });
  port.on('data', (d: Buffer) => bench.receive(d));
  port.on('error', () => {});
  bench.startRealtime();
  let closed = false;
  return {
    devicePath: pair.a,
    bench,
    writeRaw: (data) =>
      new Promise<void>((resolve, reject) => {
        port.write(data, (err) => (err ? reject(err) : port.drain(() => resolve())));
      }),
    async close() {
      if (closed) return;
      closed = true;
      bench.stopRealtime();
      bench.setOutput(null);
      if (port.isOpen) await new Promise<void>((resolve) => port.close(() => resolve()));
      await pair.close();
    },
  };
}
