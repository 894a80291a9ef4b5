// A fake microcontroller for link and daemon tests: answers HELLO with IDENT, ACKs (or NAKs) commands,
// records everything the host wrote, and can hold writes to imitate a slow operating-system buffer.

import { decodeLine, encodeLine } from '../../firmware-protocol/src/codec.js';
import { LineSplitter } from '../../firmware-protocol/src/lines.js';
import type { HostFrame } from '../../firmware-protocol/src/messages.js';
import type { Transport, TransportHandlers } from '../../server/link/transport.js';

export type Behaviour = 'normal' | 'silent' | 'junk' | 'proto2' | 'refuse-open' | 'slow-heartbeat' | 'no-nonce';

/** A fake microcontroller: answers HELLO, ACKs (or NAKs) commands; records what the host wrote. */
export class ScriptedDevice implements Transport {
  readonly description = 'scripted device';
  h: TransportHandlers | null = null;
  readonly received: HostFrame[] = [];
  private seq = 0;
  private readonly splitter = new LineSplitter((l) => this.onLine(l));
  /** When set, writes stay pending until release() (a slow OS buffer). */
  hold = false;
  private held: (() => void)[] = [];
  nakArm = false;

  constructor(private readonly behaviour: Behaviour = 'normal') {}

  async open(h: TransportHandlers): Promise<void> {
    if (this.behaviour === 'refuse-open') throw new Error('No such file or directory');
    this.h = h;
  }
  write(data: string): Promise<void> {
    return new Promise((resolve) => {
      const deliver = () => {
        this.splitter.push(data);
        resolve();
      };
      if (this.hold) this.held.push(deliver);
      else setImmediate(deliver);
    });
  }
  release(): void {
    const h = this.held;
    this.held = [];
    for (const d of h) d();
  }
  async close(): Promise<void> {
    this.h = null;
  }
  unplug(): void {
    const h = this.h;
    this.h = null;
    h?.onClose(new Error('device unplugged'));
  }
  send(line: string): void {
    this.h?.onData(Buffer.from(line, 'latin1'));
  }
  private reply<M extends 'IDENT' | 'STAT' | 'ACK' | 'NAK'>(tag: M, fields: Parameters<typeof encodeLine<M>>[2]): void {
    this.send(encodeLine(tag, this.seq++ % 65536, fields));
  }
  private onLine(line: string): void {
    const r = decodeLine(line, 'h2d');
    if (!r.ok) return;
    const f = r as unknown as HostFrame;
    this.received.push(f);
    if (this.behaviour === 'silent') return;
    if (this.behaviour === 'junk') {
      this.send('hello from some other gadget\r\n');
      return;
    }
    if (f.tag === 'HELLO') {
      const nonce = f.fields.nonce;
      this.reply('IDENT', {
        proto: this.behaviour === 'proto2' ? 2 : 1,
        fw: 'scripted',
        fwver: '0.0.1',
        caps: ['thrust@80', 'voltage@100'],
        thrmax: 0.8,
        hb: this.behaviour === 'slow-heartbeat' ? 1000 : 300,
        ...(nonce !== undefined && this.behaviour !== 'no-nonce' ? { nonce } : {}),
      });
    } else if (f.tag === 'ARM' && this.nakArm) {
      this.reply('NAK', { ref: f.seq, why: 'throttle_not_zero' });
    } else if (['ARM', 'DISARM', 'THR', 'STOP', 'CLEAR', 'TARE', 'BYE'].includes(f.tag)) {
      this.reply('ACK', { ref: f.seq });
    }
  }
}

