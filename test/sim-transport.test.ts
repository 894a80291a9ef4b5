// The virtual bench behind the Transport interface (in process, real time) and on a real pseudo-terminal.
// Waits are on events with generous deadlines; nothing here depends on how fast the machine is.

import { SerialPort } from 'serialport';
import { afterEach, describe, expect, it } from 'vitest';
import { decodeLine, encodeLine } from '../firmware-protocol/src/codec.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import type { DeviceFrame } from '../firmware-protocol/src/messages.js';
import { VirtualBench } from '../server/sim/bench.js';
import { runSimOnPty, type SimOnPty } from '../server/sim/pty.js';
import { SimTransport } from '../server/sim/sim-transport.js';
import { socatPath } from '../server/link/pty-pair.js';

const WAIT_MS = 8000;

/** Collects decoded device frames and lets a test wait for one that matches. */
class Inbox {
  readonly frames: DeviceFrame[] = [];
  private waiters: { pred: (f: DeviceFrame) => boolean; resolve: (f: DeviceFrame) => void }[] = [];
  readonly splitter = new LineSplitter((line) => {
    const r = decodeLine(line, 'd2h');
    if (!r.ok) return;
    const { ok: _ok, ...f } = r;
    const frame = f as DeviceFrame;
    this.frames.push(frame);
    this.waiters = this.waiters.filter((w) => {
      if (!w.pred(frame)) return true;
      w.resolve(frame);
      return false;
    });
  });

  waitFor(pred: (f: DeviceFrame) => boolean, what: string): Promise<DeviceFrame> {
    const seen = this.frames.find(pred);
    if (seen) return Promise.resolve(seen);
    return new Promise((resolve, reject) => {
      const timer = setTimeout(() => reject(new Error(`timed out waiting for ${what}`)), WAIT_MS);
      this.waiters.push({
        pred,
        resolve: (f) => {
          clearTimeout(timer);
          resolve(f);
        },
      });
    });
  }
}

const cleanups: (() => Promise<void> | void)[] = [];
afterEach(async () => {
  while (cleanups.length) await cleanups.pop()!();
});

describe('SimTransport', () => {
  it('answers HELLO with IDENT through asynchronous delivery, and heartbeat loss latches in real time', async () => {
    const t = new SimTransport({ seed: 41 });
    cleanups.push(() => t.close());
    expect(t.description).toBe('virtual bench (in process)');
    const inbox = new Inbox();
    await t.open({ onData: (b) => inbox.splitter.push(b), onClose: () => {} });
    const w = t.write(encodeLine('HELLO', 0, { proto: 1 }));
    // The write is handed over on a later turn of the event loop, never inside write().
    expect(t.bench.stats.linesIn).toBe(0);
    await w;
    const ident = await inbox.waitFor((f) => f.tag === 'IDENT', 'IDENT');
    expect(ident.tag === 'IDENT' && ident.fields.fw).toBe('vbench');
    // No heartbeats follow: the firmware latches within its time-out, in real time.
    const stat = await inbox.waitFor((f) => f.tag === 'STAT' && f.fields.fault === 'heartbeat', 'heartbeat latch');
    expect(stat.tag === 'STAT' && stat.fields.hbok).toBe(false);
    expect(t.bench.realtime).toBe(true);
    await t.close();
    expect(t.bench.realtime).toBe(false);
  });

  it('reports an unplug as a close with an error and refuses to reopen until it is over', async () => {
    const bench = new VirtualBench({ seed: 42 });
    const t1 = new SimTransport({ bench });
    cleanups.push(() => t1.close());
    const closed = new Promise<Error | undefined>((resolve) => {
      void t1.open({ onData: () => {}, onClose: (e) => resolve(e) });
    });
    bench.injectFault('unplug', { duration_ms: 300 });
    const err = await closed;
    expect(err?.message).toMatch(/unplugged/);
    const t2 = new SimTransport({ bench });
    cleanups.push(() => t2.close());
    await expect(t2.open({ onData: () => {}, onClose: () => {} })).rejects.toThrow(/unplugged/);
    // The pause counts as device time on the next open, so the unplug ends without anyone advancing it.
    const deadline = Date.now() + WAIT_MS;
    let opened = false;
    while (!opened && Date.now() < deadline) {
      await new Promise((r) => setTimeout(r, 50));
      opened = await t2.open({ onData: () => {}, onClose: () => {} }).then(
        () => true,
        () => false,
      );
    }
    expect(opened).toBe(true);
  });

  it('a shared bench outlives the connection: a reconnect finds the heartbeat fault latched', async () => {
    const bench = new VirtualBench({ seed: 43 });
    const t1 = new SimTransport({ bench });
    const inbox1 = new Inbox();
    await t1.open({ onData: (b) => inbox1.splitter.push(b), onClose: () => {} });
    await t1.write(encodeLine('HELLO', 0, { proto: 1 }));
    await inbox1.waitFor((f) => f.tag === 'IDENT', 'IDENT');
    await t1.close();
    // Closed for longer than the heartbeat time-out.
    await new Promise((r) => setTimeout(r, 400));
    const t2 = new SimTransport({ bench });
    cleanups.push(() => t2.close());
    const inbox2 = new Inbox();
    await t2.open({ onData: (b) => inbox2.splitter.push(b), onClose: () => {} });
    expect(bench.state.fault).toBe('heartbeat');
    await t2.write(encodeLine('STATUS', 1, {}));
    const s = await inbox2.waitFor((f) => f.tag === 'STAT', 'STAT');
    expect(s.tag === 'STAT' && s.fields.fault).toBe('heartbeat');
  });
});

describe.skipIf(socatPath() === null)('runSimOnPty', () => {
  it('serves the protocol on a real pseudo-terminal: HELLO gets IDENT, ARM gets ACK', async () => {
    let sim: SimOnPty | null = await runSimOnPty({ seed: 44 });
    cleanups.push(async () => {
      await sim?.close();
      sim = null;
    });
    const port = new SerialPort({ path: sim.devicePath, baudRate: 115200, autoOpen: false });
    await new Promise<void>((resolve, reject) => port.open((e) => (e ? reject(e) : resolve())));
    cleanups.push(() => new Promise<void>((resolve) => (port.isOpen ? port.close(() => resolve()) : resolve())));
    const inbox = new Inbox();
    port.on('data', (d: Buffer) => inbox.splitter.push(d));
    const seen = inbox.frames.length;
    port.write(encodeLine('HELLO', 0, { proto: 1, host: 'pty-test' }));
    const ident = await inbox.waitFor((f) => f.tag === 'IDENT' && inbox.frames.indexOf(f) >= seen, 'IDENT over the pty');
    expect(ident.tag === 'IDENT' && ident.fields.caps).toContain('thrust@80');
    port.write(encodeLine('HB', 1, {}) + encodeLine('ARM', 2, {}));
    const ack = await inbox.waitFor((f) => (f.tag === 'ACK' || f.tag === 'NAK') && f.fields.ref === 2, 'ARM reply');
    expect(ack.tag).toBe('ACK');
    const tel = await inbox.waitFor((f) => f.tag === 'TEL' && f.fields.v !== undefined, 'TEL with voltage');
    expect(tel.tag === 'TEL' && tel.fields.v).toBeGreaterThan(14);
  });

  it('fails with a clear message when the device path cannot be created', async () => {
    await expect(runSimOnPty({ link: '/nonexistent-dir/for/sure/dev' })).rejects.toThrow(/socat exited/);
  });
});
