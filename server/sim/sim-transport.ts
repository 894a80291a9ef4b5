// The virtual bench as a Transport: the daemon talks to an in-process VirtualBench running in real time,
// through exactly the byte path a serial port gives it. Bytes are delivered asynchronously (setImmediate) in
// both directions, so the daemon's line splitting, decoding and write queue run as they would on hardware,
// and nothing the daemon does can re-enter it synchronously.

import type { Transport, TransportHandlers } from '../link/transport.js';
import { VirtualBench, type VirtualBenchOptions } from './bench.js';

export interface SimTransportOptions extends VirtualBenchOptions {
  /**
   * Bench to attach to. Pass one shared bench when a link makes a fresh transport per reconnection, so the
   * device outlives the connection (a reconnect then finds it latched, as a real board would be); when left
   * out, each transport builds its own bench from the other options.
   */
  bench?: VirtualBench;
}

export class SimTransport implements Transport {
  readonly description = 'virtual bench (in process)';
  readonly bench: VirtualBench;
  private handlers: TransportHandlers | null = null;
  private offLink: (() => void) | null = null;
  private offError: (() => void) | null = null;

  constructor(opts: SimTransportOptions = {}) {
    const { bench, ...benchOpts } = opts;
    this.bench = bench ?? new VirtualBench(benchOpts);
  }

  async open(handlers: TransportHandlers): Promise<void> {
    if (this.handlers) throw new Error('virtual bench transport is already open');
    this.bench.startRealtime();
    if (this.bench.unplugged) {
      this.bench.stopRealtime();
      throw new Error('virtual bench is unplugged');
    }
    this.handlers = handlers;
    const mine = handlers;
    this.bench.setOutput((chunk) => {
      const buf = Buffer.from(chunk, 'latin1');
      setImmediate(() => {
        if (this.handlers === mine) mine.onData(buf);
      });
    });
    this.offLink = this.bench.onLink((plugged) => {
      if (!plugged) this.lost(new Error('virtual bench unplugged'));
    });
    this.offError = this.bench.onError((e) => this.lost(new Error(`virtual bench failed: ${e.message}`)));
  }

  write(data: string): Promise<void> {
    if (!this.handlers) return Promise.reject(new Error('virtual bench transport is not open'));
    const mine = this.handlers;
    return new Promise((resolve) => {
      setImmediate(() => {
        // A write that raced a close or an unplug is lost, as bytes on a pulled cable are.
        if (this.handlers === mine) this.bench.receive(data);
        resolve();
      });
    });
  }

  async close(): Promise<void> {
    if (!this.handlers) return;
    this.detach();
  }

  private lost(err: Error): void {
    const h = this.handlers;
    if (!h) return;
    this.detach();
    setImmediate(() => h.onClose(err));
  }

  private detach(): void {
    this.handlers = null;
    this.offLink?.();
    this.offLink = null;
    this.offError?.();
    this.offError = null;
    this.bench.setOutput(null);
    // Paused, not powered off: the next open lives through the gap (see VirtualBench.startRealtime).
    this.bench.stopRealtime();
  }
}
