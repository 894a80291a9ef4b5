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
  /** Host time (ms) of the last message from this client. */
  lastHeardAt: number;
  /** True once the client has sent a heartbeat ping: only such a dashboard can be judged silent. */
  heartbeats: boolean;
  /** False until its first message (the snapshot) is sent: broadcasts skip it until then. */
  welcomed: boolean;
}

/** A pending takeover: who asked, and until when the controller may answer. */
interface Takeover {
  request: number;
  from: number;
  /** The asker's message id, answered when the takeover is decided. */
  replyId: number;
  expires: NodeJS.Timeout;
}

/** How long the controller has to answer a takeover request before it is refused. */
export const TAKEOVER_ANSWER_MS = 15_000;

export interface HubHandlers {
  /**
   * A validated message from a client; the reply is sent by the hub, carrying what the promise resolves to
   * (when not undefined) as `data`, or for a rejection whose error has an `issues` list, those issues.
   */
  onMessage(client: Client, msg: ClientMessage): Promise<unknown>;
  /**
   * The first message(s) for a new client: a message, texts already serialised (a shared snapshot), or null
   * when the caller sends them later with welcome() (snapshots paced out to a crowd).
   */
  onConnect(client: Client): ServerMessage | readonly (string | Buffer)[] | null;
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
    const client: Client = { id: this.nextId++, ws, role, droppedBatches: 0, tokens: CLIENT_RATE_PER_S, lastRefill: Date.now(), lastHeardAt: Date.now(), heartbeats: false, welcomed: false };
    this.clients.set(client.id, client);
    if (role === 'controller') this.controllerId = client.id;
    ws.on('message', (data, isBinary) => this.onRaw(client, isBinary ? null : data.toString()));
    ws.on('close', () => this.remove(client));
    ws.on('error', () => this.remove(client));
    const first = this.h.onConnect(client);
    if (first !== null) this.welcome(client, Array.isArray(first) ? (first as readonly (string | Buffer)[]) : [JSON.stringify(first)]);
    return client;
  }

  /** Sends a client its first messages; from then on it gets broadcasts. */
  welcome(client: Client, texts: readonly (string | Buffer)[]): void {
    if (client.welcomed || !this.clients.has(client.id)) return;
    client.welcomed = true;
    for (const t of texts) this.sendText(client, t);
  }

  /** Sends to every client; sample batches are skipped for clients that are behind. */
  broadcast(msg: ServerMessage): void {
    if (this.clients.size === 0) return;
    this.broadcastText(JSON.stringify(msg), msg.type === 'samples');
  }

  /** Sends a serialised message to every client; a droppable one (samples) skips clients that are behind. */
  broadcastText(text: string, droppable: boolean): void {
    for (const c of this.clients.values()) {
      if (!c.welcomed) continue;
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

  /** Each client's role, buffer and dropped batches (diagnostics). */
  stats(): { id: number; role: Role; bufferedAmount: number; droppedBatches: number }[] {
    return [...this.clients.values()].map((c) => ({ id: c.id, role: c.role, bufferedAmount: c.ws.bufferedAmount, droppedBatches: c.droppedBatches }));
  }

  private sendText(c: Client, text: string | Buffer): void {
    if (c.ws.readyState !== c.ws.OPEN) return;
    if (c.ws.bufferedAmount > HARD_CAP_BYTES) {
      c.ws.terminate();
      this.remove(c);
      return;
    }
    // A Buffer is a text frame already encoded once for many clients, not binary data.
    c.ws.send(text, { binary: false });
  }

  private onRaw(client: Client, text: string | null): void {
    const now = Date.now();
    client.lastHeardAt = now;
    client.tokens = Math.min(CLIENT_RATE_PER_S, client.tokens + ((now - client.lastRefill) / 1000) * CLIENT_RATE_PER_S);
    client.lastRefill = now;
    // Over its budget, a client's messages are dropped unanswered (answering a flood doubles it), except a
    // stop: a short message is parsed, and carried out whatever the budget if its type is stop. The type is
    // read from the parsed message, never from the text: `{"type":"ping","x":"stop"}` is a ping.
    if (client.tokens < 1 && !(text !== null && text.length <= STOP_MAX_CHARS && isStop(text))) return;
    if (text === null) {
      client.tokens -= 1;
      this.send(client, { type: 'reply', id: -1, ok: false, error: 'binary messages are not accepted' });
      return;
    }
    const parsed = parseClientMessage(text);
    if (!parsed.ok) {
      client.tokens -= 1;
      // Answer to the message's own id when it has a readable one, so the sender can tell which was refused.
      this.send(client, { type: 'reply', id: idOf(text), ok: false, error: parsed.error });
      return;
    }
    const msg = parsed.value;
    const id = msg.id ?? -1;
    if (msg.type === 'ping') client.heartbeats = true;
    if (msg.type === 'takeover_request' || msg.type === 'takeover_answer') {
      client.tokens -= 1;
      this.takeover(client, msg, id);
      return;
    }
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

  private pendingTakeover: Takeover | null = null;
  private nextRequest = 1;

  /**
   * One controller at a time. A viewer's request is granted at once when nobody controls the bench; otherwise
   * the controller is asked and must allow it (or it expires). The old controller becomes a viewer; the
   * motor is not touched by a handover.
   */
  private takeover(client: Client, msg: Extract<ClientMessage, { type: 'takeover_request' | 'takeover_answer' }>, id: number): void {
    if (msg.type === 'takeover_request') {
      if (client.role === 'controller') return this.send(client, { type: 'reply', id, ok: true, data: { role: 'controller' } });
      const current = this.controller;
      if (!current) {
        this.setRole(client, 'controller');
        return this.send(client, { type: 'reply', id, ok: true, data: { role: 'controller' } });
      }
      if (this.pendingTakeover) return this.send(client, { type: 'reply', id, ok: false, error: 'another dashboard is already asking for control' });
      const request = this.nextRequest++;
      this.pendingTakeover = {
        request,
        from: client.id,
        replyId: id,
        expires: setTimeout(() => {
          if (this.pendingTakeover?.request !== request) return;
          this.pendingTakeover = null;
          const asker = this.clients.get(client.id);
          if (asker) this.send(asker, { type: 'reply', id, ok: false, error: 'the controlling dashboard did not answer' });
        }, TAKEOVER_ANSWER_MS),
      };
      this.pendingTakeover.expires.unref();
      this.send(current, { type: 'takeover_asked', request, from: client.id });
      return;
    }
    // takeover_answer
    const p = this.pendingTakeover;
    if (client.role !== 'controller') return this.send(client, { type: 'reply', id, ok: false, error: 'only the controlling dashboard answers a takeover request' });
    if (!p || p.request !== msg.request) return this.send(client, { type: 'reply', id, ok: false, error: 'no such takeover request (expired or answered)' });
    clearTimeout(p.expires);
    this.pendingTakeover = null;
    const asker = this.clients.get(p.from);
    const replyId = p.replyId;
    this.send(client, { type: 'reply', id, ok: true });
    if (!asker) return;
    if (!msg.allow) return this.send(asker, { type: 'reply', id: replyId, ok: false, error: 'the controlling dashboard declined' });
    this.setRole(client, 'viewer');
    this.setRole(asker, 'controller');
    this.send(asker, { type: 'reply', id: replyId, ok: true, data: { role: 'controller' } });
  }

  private setRole(c: Client, role: Role): void {
    c.role = role;
    if (role === 'controller') this.controllerId = c.id;
    else if (this.controllerId === c.id) this.controllerId = null;
    this.send(c, { type: 'role', role });
  }

  private remove(client: Client): void {
    if (!this.clients.delete(client.id)) return;
    const p = this.pendingTakeover;
    if (p && (p.from === client.id || this.controllerId === client.id)) {
      clearTimeout(p.expires);
      this.pendingTakeover = null;
    }
    if (this.controllerId === client.id) this.controllerId = null;
    this.h.onDisconnect(client);
    // The controller is gone while someone was asking for control: its absence is the answer.
    const asker = p && p.from !== client.id ? this.clients.get(p.from) : undefined;
    if (asker && this.controllerId === null) {
      this.setRole(asker, 'controller');
      this.send(asker, { type: 'reply', id: p!.replyId, ok: true, data: { role: 'controller' } });
    }
  }
}

/** A stop message is short; longer texts over the budget are not even parsed. */
const STOP_MAX_CHARS = 200;

function isStop(text: string): boolean {
  try {
    const v = JSON.parse(text) as { type?: unknown } | null;
    return typeof v === 'object' && v !== null && !Array.isArray(v) && v.type === 'stop';
  } catch {
    return false;
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
