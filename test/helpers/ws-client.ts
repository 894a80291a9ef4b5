// A minimal dashboard stand-in for tests: connects with the token, collects messages, waits for conditions,
// and sends commands with ids, resolving on their replies.

import WebSocket from 'ws';
import type { ClientMessage, SampleBatch, ServerMessage, Snapshot } from '../../server/api/messages.js';

export class TestClient {
  readonly messages: ServerMessage[] = [];
  readonly samples: { t: number[]; thrust: (number | null)[]; out: (number | null)[]; power: (number | null)[] } = { t: [], thrust: [], out: [], power: [] };
  snapshot: Snapshot | null = null;
  private nextId = 1;
  private waiters: { check: () => boolean; resolve: () => void }[] = [];

  private constructor(readonly ws: WebSocket) {
    ws.on('message', (data) => {
      const m = JSON.parse(data.toString()) as ServerMessage;
      this.messages.push(m);
      if (m.type === 'snapshot') this.snapshot = m;
      if (m.type === 'samples') this.addBatch(m.batch);
      for (const w of [...this.waiters]) if (w.check()) {
        this.waiters.splice(this.waiters.indexOf(w), 1);
        w.resolve();
      }
    });
  }

  static async connect(port: number, token: string): Promise<TestClient> {
    const ws = new WebSocket(`ws://127.0.0.1:${port}/ws?token=${encodeURIComponent(token)}`, { headers: { origin: `http://127.0.0.1:${port}` } });
    const c = new TestClient(ws);
    await new Promise<void>((resolve, reject) => {
      ws.once('open', () => resolve());
      ws.once('error', reject);
    });
    await c.until(() => c.snapshot !== null, 5000, 'snapshot');
    return c;
  }

  private addBatch(b: SampleBatch): void {
    this.samples.t.push(...b.t);
    this.samples.thrust.push(...b.thrust);
    this.samples.out.push(...b.out);
    this.samples.power.push(...b.power);
  }

  /** Resolves when check() holds; rejects after ms with the label. */
  until(check: () => boolean, ms = 10_000, label = 'condition'): Promise<void> {
    if (check()) return Promise.resolve();
    return new Promise((resolve, reject) => {
      const w = { check, resolve: () => {
        clearTimeout(timer);
        resolve();
      } };
      const timer = setTimeout(() => {
        this.waiters.splice(this.waiters.indexOf(w), 1);
        reject(new Error(`timed out after ${ms} ms waiting for ${label}`));
      }, ms);
      this.waiters.push(w);
    });
  }

  /** Latest bench view (from the snapshot or a later bench message). */
  get bench(): Snapshot['bench'] {
    for (let i = this.messages.length - 1; i >= 0; i--) {
      const m = this.messages[i];
      if (m.type === 'bench' || m.type === 'snapshot') return m.bench;
    }
    throw new Error('no bench view yet');
  }

  async command(msg: ClientMessage): Promise<{ ok: boolean; error?: string }> {
    const id = this.nextId++;
    this.ws.send(JSON.stringify({ ...msg, id }));
    let reply: ServerMessage | undefined;
    await this.until(() => (reply = this.messages.find((m) => m.type === 'reply' && m.id === id)) !== undefined, 5000, `reply to ${msg.type}`);
    const r = reply as Extract<ServerMessage, { type: 'reply' }>;
    return r.ok ? { ok: true } : { ok: false, error: r.error };
  }

  lastThrust(): number | null {
    for (let i = this.samples.thrust.length - 1; i >= 0; i--) if (this.samples.thrust[i] !== null) return this.samples.thrust[i];
    return null;
  }

  close(): void {
    this.ws.close();
  }
}
