// A minimal scripted host for driving a VirtualBench in manual time: it encodes commands with the real
// codec, decodes everything the bench sends with the real decoder, and timestamps each frame with the
// bench's simulated time. Used by the simulator's own tests and available to other tests and benchmarks
// that need a device without a daemon.

import { decodeLine, encodeLine, nextSeq } from '../../firmware-protocol/src/codec.js';
import { LineSplitter } from '../../firmware-protocol/src/lines.js';
import { HEARTBEAT_INTERVAL_MS, PROTOCOL_VERSION, type DeviceFrame, type FieldsOf, type FrameOf, type HostCommandTag } from '../../firmware-protocol/src/messages.js';
import type { VirtualBench } from './bench.js';

export type Received = DeviceFrame & { atMs: number };

export class BenchHost {
  readonly frames: Received[] = [];
  badLines = 0;
  seq = 0;
  private readonly splitter: LineSplitter;

  constructor(readonly bench: VirtualBench) {
    this.splitter = new LineSplitter((line) => {
      const r = decodeLine(line, 'd2h');
      if (!r.ok) {
        this.badLines++;
        return;
      }
      const { ok: _ok, ...frame } = r;
      this.frames.push({ ...(frame as DeviceFrame), atMs: bench.state.simTimeMs });
    });
    bench.setOutput((chunk) => this.splitter.push(chunk));
  }

  /** Sends one command; returns the sequence number it carried. */
  send<M extends HostCommandTag>(tag: M, fields: FieldsOf<M> = {} as FieldsOf<M>): number {
    const s = this.seq;
    this.bench.receive(encodeLine(tag, s, fields));
    this.seq = nextSeq(s);
    return s;
  }

  /** Sends a command and runs the device 2 ms so the main loop takes it; returns the ACK or NAK for it. */
  command<M extends HostCommandTag>(tag: M, fields: FieldsOf<M> = {} as FieldsOf<M>): FrameOf<'ACK'> | FrameOf<'NAK'> {
    const s = this.send(tag, fields);
    this.bench.advance(2);
    const reply = this.frames.find((f): f is Received & (FrameOf<'ACK'> | FrameOf<'NAK'>) => (f.tag === 'ACK' || f.tag === 'NAK') && f.fields.ref === s);
    if (!reply) throw new Error(`no ACK/NAK for ${tag} seq ${s}`);
    return reply;
  }

  /** HELLO, then a heartbeat so the handshake is complete. */
  handshake(): void {
    this.send('HELLO', { proto: PROTOCOL_VERSION, host: 'test-host' });
    this.send('HB');
    this.bench.advance(2);
  }

  /** Runs the device for `ms` while sending heartbeats every `everyMs`. */
  run(ms: number, everyMs = HEARTBEAT_INTERVAL_MS / 2): void {
    let left = ms;
    while (left > 0) {
      const step = Math.min(everyMs, left);
      this.send('HB');
      this.bench.advance(step);
      left -= step;
    }
  }

  of<M extends DeviceFrame['tag']>(tag: M): (FrameOf<M> & { atMs: number })[] {
    return this.frames.filter((f) => f.tag === tag) as (FrameOf<M> & { atMs: number })[];
  }

  last<M extends DeviceFrame['tag']>(tag: M): (FrameOf<M> & { atMs: number }) | undefined {
    const all = this.of(tag);
    return all[all.length - 1];
  }

  clear(): void {
    this.frames.length = 0;
  }
}
