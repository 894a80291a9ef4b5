// WebSocket fan-out. Each client has its own small state: role, dropped-frame count, rate budget. Sample
// batches are dropped for a client whose socket buffer is over a cap, so a slow or frozen viewer never slows
// ingest or anybody else; state and reply messages are small and always sent, and a client whose buffer
// keeps growing past a hard cap is disconnected.

import type { WebSocket } from 'ws';
import { CONTROL_TYPES, parseClientMessage, type ClientMessage, type Role, type SequenceIssueView, type ServerMessage } from '../api/messages.js';

/** Over this many buffered bytes a client gets no more sample batches until it drains. */
export const SAMPLE_DROP_BYTES = 256 * 1024;
/** Over this it is disconnected: it is not reading at all. */
export const HARD_CAP_BYTES = 8 * 1024 * 1024;
/** Messages per second a client may send (burst of the same size). */
export const CLIENT_RATE_PER_S = 40;

export interface Client {
  readonly id: number;
  readonly ws: WebSocket;
  role: Role;
  droppedBatches: number;
  tokens: number;
  lastRefill: number;
}

export interface HubHandlers {
  /**
   * A validated message from a client; the reply is sent by the hub, carrying what the promise resolves to
   * (when not undefined) as `data`, or for a rejection whose error has an `issues` list, those issues.
   */
  onMessage(client: Client, msg: ClientMessage): Promise<unknown>;
  onConnect(client: Client): ServerMessage;
  onDisconnect(client: Client): void;
}

export class Hub {
  private readonly clients = new Map<number, Client>();
  private nextId = 1;
  private controllerId: number | null = null;

  constructor(private readonly h: HubHandlers) {}

  get size(): number {
    return this.clients.size;
  }

  get controller(): Client | null {
    return this.controllerId === null ? null : (this.clients.get(this.controllerId) ?? null);
  }

  add(ws: WebSocket): Client {
    const role: Role = this.controllerId === null ? 'controller' : 'viewer';
    const client: Client = { id: this.nextId++, ws, role, droppedBatches: 0, tokens: CLIENT_RATE_PER_S, lastRefill: Date.now() };
    this.clients.set(client.id, client);
    if (role === 'controller') this.controllerId = client.id;
    ws.on('message', (data, isBinary) => this.onRaw(client, isBinary ? null : data.toString()));
    ws.on('close', () => this.remove(client));
    ws.on('error', () => this.remove(client));
    this.send(client, this.h.onConnect(client));
    return client;
  }

  /** Sends to every client; sample batches are skipped for clients that are behind. */
  broadcast(msg: ServerMessage): void {
    if (this.clients.size === 0) return;
    const text = JSON.stringify(msg);
    const droppable = msg.type === 'samples';
    for (const c of this.clients.values()) {
      if (droppable && c.ws.bufferedAmount > SAMPLE_DROP_BYTES) {
        c.droppedBatches++;
        continue;
      }
      this.sendText(c, text);
    }
  }

  send(client: Client, msg: ServerMessage): void {
    this.sendText(client, JSON.stringify(msg));
  }

  closeAll(code = 1001, reason = 'daemon stopping'): void {
    for (const c of this.clients.values()) c.ws.close(code, reason);
  }

  private sendText(c: Client, text: string): void {
    if (c.ws.readyState !== c.ws.OPEN) return;
    if (c.ws.bufferedAmount > HARD_CAP_BYTES) {
      c.ws.terminate();
      this.remove(c);
      return;
    }
    c.ws.send(text);
  }

  private onRaw(client: Client, text: string | null): void {
    const now = Date.now();
    client.tokens = Math.min(CLIENT_RATE_PER_S, client.tokens + ((now - client.lastRefill) / 1000) * CLIENT_RATE_PER_S);
    client.lastRefill = now;
    if (text === null) {
      this.send(client, { type: 'reply', id: -1, ok: false, error: 'binary messages are not accepted' });
      return;
    }
    const parsed = parseClientMessage(text);
    if (!parsed.ok) {
      // Answer to the message's own id when it has a readable one, so the sender can tell which was refused.
      this.send(client, { type: 'reply', id: idOf(text), ok: false, error: parsed.error });
      return;
    }
    const msg = parsed.value;
    const id = msg.id ?? -1;
    // Stop is never rate-limited and never refused for role: anyone watching may stop the motor.
    if (msg.type !== 'stop') {
      if (client.tokens < 1) {
        this.send(client, { type: 'reply', id, ok: false, error: 'rate limit: too many messages' });
        return;
      }
      client.tokens -= 1;
      if (CONTROL_TYPES.has(msg.type) && client.role !== 'controller') {
        this.send(client, { type: 'reply', id, ok: false, error: 'this dashboard is a viewer: only the controlling dashboard can command the bench' });
        return;
      }
    }
    this.h.onMessage(client, msg).then(
      (data) => this.send(client, data === undefined ? { type: 'reply', id, ok: true } : { type: 'reply', id, ok: true, data }),
      (err: Error & { issues?: unknown }) => {
        const issues = Array.isArray(err.issues) ? (err.issues as SequenceIssueView[]).map((i) => ({ path: String(i.path), rule: String(i.rule) })) : null;
        this.send(client, issues ? { type: 'reply', id, ok: false, error: err.message, issues } : { type: 'reply', id, ok: false, error: err.message });
      },
    );
  }

  private remove(client: Client): void {
    if (!this.clients.delete(client.id)) return;
    if (this.controllerId === client.id) this.controllerId = null;
    this.h.onDisconnect(client);
  }
}

function idOf(text: string): number {
  try {
    const id = (JSON.parse(text) as { id?: unknown } | null)?.id;
    return Number.isSafeInteger(id) && (id as number) >= 0 ? (id as number) : -1;
  } catch {
    return -1;
  }
}
