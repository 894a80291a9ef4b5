// The web side, on a worker thread of its own: the HTTP surface, the WebSocket hub, the history ring that
// snapshots are cut from, live batches, and the sessions API. None of it shares an event loop with the serial
// read, decode, interlocks, heartbeat and controller writes on the bench's thread, so a crowd of dashboards, a
// 354 KB snapshot, an export of an hour-long session or a stall of this thread cannot delay a heartbeat.
//
// What it knows of the bench is a mirror folded from the messages the bench broadcasts (server/web/bridge.ts);
// commands go back to the bench's thread and wait for its reply there. Snapshots are built once and shared:
// every dashboard connecting within SNAPSHOT_REUSE_MS of the last build gets the same encoded bytes, followed
// by the live batches broadcast since it was built, so the shared snapshot leaves no gap in its chart.

import { parentPort, workerData } from 'node:worker_threads';
import { API_VERSION, type ClientMessage, type ServerMessage } from '../api/messages.js';
import { LiveBatch, SampleRing } from '../bench/history.js';
import { Hub, type Client } from '../http/hub.js';
import { startHttp, type ApiHandler, type HttpSurface } from '../http/server.js';
import { sessionsApi } from '../http/sessions-api.js';
import { partsApi } from '../http/parts-api.js';
import { PartsLibrary } from '../parts/library.js';
import { SessionStore } from '../store/store.js';
import type { ClientRef, FromWeb, MirrorState, ToWeb, WebConfig } from './bridge.js';

/** A snapshot younger than this, of unchanged bench state, is shared by every dashboard that connects. */
export const SNAPSHOT_REUSE_MS = 1000;
/** Live batches kept to follow a shared snapshot; past this many a fresh snapshot is cheaper to send. */
const SNAPSHOT_TAIL_MAX = 40;
/**
 * Snapshots go out to a crowd in slices: at most this many bytes every WELCOME_TICK_MS (about 100 MB/s, a
 * 750 KB snapshot to 200 dashboards in 1.5 s). Sent all at once, they are a burst of CPU for this thread, the
 * kernel and the receivers that competes with the bench's thread on a two-core machine.
 */
const WELCOME_BYTES_PER_TICK = 1024 * 1024;
const WELCOME_TICK_MS = 10;

const port = parentPort!;
const cfg = workerData as WebConfig;
const post = (m: FromWeb) => port.postMessage(m);

let mirror: MirrorState | null = null;
/** Bumped on every change of the bench state a snapshot carries (not on samples: those follow as a tail). */
let stateVersion = 0;
const ring = new SampleRing(cfg.historyCapacity);
const live = new LiveBatch();

interface SharedSnapshot {
  version: number;
  builtAt: number;
  controller: Buffer;
  viewer: Buffer;
  /** Live batches broadcast since the build, in order. */
  tail: string[];
}
let shared: SharedSnapshot | null = null;
let snapshotsBuilt = 0;
let snapshotsSent = 0;

function fold(msg: ServerMessage): void {
  if (!mirror) return;
  switch (msg.type) {
    case 'bench':
      mirror.bench = msg.bench;
      break;
    case 'link':
      mirror.link = msg.link;
      break;
    case 'identity':
      mirror.identity = msg.identity;
      break;
    case 'event':
      mirror.events.push(msg.event);
      if (mirror.events.length > 200) mirror.events.splice(0, mirror.events.length - 200);
      break;
    case 'extras':
      Object.assign(mirror.extras, msg.extras);
      break;
    default:
      return;
  }
  stateVersion++;
}

function snapshotFor(client: Client): readonly (string | Buffer)[] {
  const now = Date.now();
  if (!mirror) return [];
  if (!shared || shared.version !== stateVersion || now - shared.builtAt > SNAPSHOT_REUSE_MS || shared.tail.length > SNAPSHOT_TAIL_MAX) {
    const m = mirror!;
    // One serialisation for everyone; the role is the only per-client field and goes in front.
    const body = JSON.stringify({
      bench: m.bench,
      link: m.link,
      identity: m.identity,
      history: ring.toBatch(now - cfg.snapshotWindowMs, cfg.snapshotMaxPoints),
      events: m.events.slice(-50),
      extras: m.extras,
      run: m.run,
    });
    const make = (role: string) => Buffer.from(`{"type":"snapshot","api":${JSON.stringify(API_VERSION)},"role":"${role}",${body.slice(1)}`);
    shared = { version: stateVersion, builtAt: now, controller: make('controller'), viewer: make('viewer'), tail: [] };
    snapshotsBuilt++;
  }
  snapshotsSent++;
  return [client.role === 'controller' ? shared.controller : shared.viewer, ...shared.tail];
}

// Commands wait for the bench's reply; the hub sends it.
let nextSeq = 1;
const waiting = new Map<number, { resolve: (v: unknown) => void; reject: (e: Error) => void }>();
const ref = (c: Client): ClientRef => ({ id: c.id, role: c.role });

// Clients waiting for their snapshot, oldest first; the first of a tick always goes, whatever its size.
const welcoming: Client[] = [];
let welcomeTimer: NodeJS.Timeout | null = null;
function welcomeSome(): void {
  let sent = 0;
  while (welcoming.length && sent < WELCOME_BYTES_PER_TICK) {
    const c = welcoming.shift()!;
    const texts = snapshotFor(c);
    hub.welcome(c, texts);
    for (const t of texts) sent += t.length;
  }
  if (welcoming.length === 0 && welcomeTimer) {
    clearInterval(welcomeTimer);
    welcomeTimer = null;
  }
}

const hub = new Hub({
  onConnect: (client) => {
    welcoming.push(client);
    if (!welcomeTimer) {
      welcomeTimer = setInterval(welcomeSome, WELCOME_TICK_MS);
      welcomeSome();
    }
    return null;
  },
  onDisconnect: (client) => post({ k: 'disconnect', client: ref(client) }),
  onMessage: (client, msg: ClientMessage) => {
    // A heartbeat needs nothing from the bench: answered here, it never crosses to the bench's thread.
    if (msg.type === 'ping') return Promise.resolve(undefined);
    const seq = nextSeq++;
    return new Promise((resolve, reject) => {
      waiting.set(seq, { resolve, reject });
      post({ k: 'message', seq, client: ref(client), msg });
    });
  },
});

let store: SessionStore | null = null;
let storeError = cfg.storeUnavailable;
if (cfg.dataDir && !storeError) {
  try {
    // A second connection to the bench's file: no recovery (the bench's own open did it, and would see its
    // live session marked interrupted), a longer busy wait than the recorder's (this thread may wait).
    store = SessionStore.open(cfg.dataDir, { recover: false, busyTimeoutMs: 2000 });
  } catch {
    // A full disk: what is there can still be listed and read.
    try {
      store = SessionStore.openForReading(cfg.dataDir, { busyTimeoutMs: 2000 });
    } catch (err) {
      storeError = `the session store cannot be opened: ${(err as Error).message}`;
    }
  }
}

const api: Record<string, ApiHandler> = {
  'GET /api/status': async () => ({ status: 200, body: { bench: mirror?.bench, link: mirror?.link, identity: mirror?.identity ?? null } }),
  ...(store ? partsApi(new PartsLibrary(store.db)) : {}),
  ...(store
    ? sessionsApi({ store, recordingId: () => mirror?.recordingId ?? null })
    : {
        'GET /api/sessions': async () => ({ status: 503, body: { error: storeError ?? 'this daemon keeps no sessions (started without a data folder)' } }),
      }),
};

let http: HttpSurface | null = null;
try {
  http = await startHttp({
    host: cfg.host,
    port: cfg.port,
    token: cfg.token,
    webRoot: cfg.webRoot,
    onSocket: (ws) => hub.add(ws),
    api,
    onHandlerError: (err) => post({ k: 'handler_error', message: err.message }),
  });
  post({ k: 'listening', port: http.port });
} catch (err) {
  post({ k: 'failed', error: (err as Error).message, ...((err as NodeJS.ErrnoException).code ? { code: (err as NodeJS.ErrnoException).code } : {}) });
}

const flush = setInterval(() => {
  if (live.size === 0) return;
  const text = JSON.stringify({ type: 'samples', batch: live.take(cfg.liveRowsPerBatch) });
  hub.broadcastText(text, true);
  shared?.tail.push(text);
}, cfg.batchIntervalMs);

const alive = setInterval(() => {
  const c = hub.controller;
  post({ k: 'alive', at: Date.now(), clients: hub.size, controller: c ? { id: c.id, heartbeats: c.heartbeats, lastHeardAt: c.lastHeardAt } : null });
}, cfg.aliveIntervalMs);

port.on('message', (m: ToWeb) => {
  switch (m.k) {
    case 'init':
      mirror = m.state;
      stateVersion++;
      return;
    case 'broadcast':
      fold(m.msg);
      hub.broadcast(m.msg);
      return;
    case 'mirror':
      if (!mirror) return;
      if (m.run !== undefined) mirror.run = m.run;
      if (m.recordingId !== undefined) mirror.recordingId = m.recordingId;
      stateVersion++;
      return;
    case 'samples':
      ring.pushColumns(m.cols, m.n);
      live.addColumns(m.cols, m.n);
      return;
    case 'reply': {
      const w = waiting.get(m.seq);
      if (!w) return;
      waiting.delete(m.seq);
      if (m.ok) w.resolve(m.data);
      else w.reject(Object.assign(new Error(m.error), m.issues ? { issues: m.issues } : {}));
      return;
    }
    case 'stats':
      post({ k: 'stats', seq: m.seq, clients: hub.stats(), snapshotsBuilt, snapshotsSent });
      return;
    case 'stall': {
      const end = performance.now() + m.ms;
      while (performance.now() < end) {
        /* blocked on purpose */
      }
      return;
    }
    case 'close':
      void shutdown();
      return;
  }
});

async function shutdown(): Promise<void> {
  clearInterval(flush);
  clearInterval(alive);
  if (welcomeTimer) clearInterval(welcomeTimer);
  for (const w of waiting.values()) w.reject(new Error('daemon stopping'));
  waiting.clear();
  hub.closeAll();
  await http?.close();
  store?.close();
  post({ k: 'closed' });
  port.close();
}
