// The messages between the bench's thread (link, controller, interlocks, recording: the safety path) and the
// web side's worker thread (HTTP, WebSocket hub, history for snapshots, the sessions API). Declared once here;
// both ends switch on `k`. Everything crosses by structured clone; sample columns are transferred, not copied.

import type { ClientMessage, DeviceIdentity, BenchEvent, BenchView, LinkView, Role, SequenceRunView, ServerMessage } from '../api/messages.js';
import type { Columns } from '../bench/history.js';

/** What the web side needs at start, fixed for its life. */
export interface WebConfig {
  host: string;
  port: number;
  token: string;
  webRoot: string;
  /** The session store's folder, opened by the web side for the sessions API (no recovery: the bench owns that). */
  dataDir: string | null;
  /** Why there is no sessions API although a data folder was given (the store could not be opened), or null. */
  storeUnavailable: string | null;
  historyCapacity: number;
  snapshotWindowMs: number;
  snapshotMaxPoints: number;
  liveRowsPerBatch: number;
  batchIntervalMs: number;
  /** How often the web side says it is alive, with its view of the controlling dashboard. */
  aliveIntervalMs: number;
}

/** The state a snapshot is made of, as the bench last reported it. */
export interface MirrorState {
  bench: BenchView;
  link: LinkView;
  identity: DeviceIdentity | null;
  events: BenchEvent[];
  extras: Record<string, unknown>;
  run: SequenceRunView | null;
  recordingId: number | null;
}

export interface ClientRef {
  id: number;
  role: Role;
}

export interface ControllerLiveness {
  id: number;
  heartbeats: boolean;
  /** Wall-clock time (ms) the controlling dashboard was last heard from. */
  lastHeardAt: number;
}

export interface ClientStat {
  id: number;
  role: Role;
  bufferedAmount: number;
  droppedBatches: number;
}

export type ToWeb =
  | { k: 'init'; state: MirrorState }
  /** A message for every dashboard; the web side also folds it into its mirror of the bench. */
  | { k: 'broadcast'; msg: ServerMessage }
  | { k: 'mirror'; run?: SequenceRunView | null; recordingId?: number | null }
  | { k: 'samples'; cols: Columns; n: number }
  | { k: 'reply'; seq: number; ok: true; data: unknown }
  | { k: 'reply'; seq: number; ok: false; error: string; issues?: { path: string; rule: string }[] }
  | { k: 'stats'; seq: number }
  /** Diagnostics and tests: block the web side's event loop for `ms` (as a long snapshot or GC would). */
  | { k: 'stall'; ms: number }
  | { k: 'close' };

export type FromWeb =
  | { k: 'listening'; port: number }
  | { k: 'failed'; error: string; code?: string }
  | { k: 'message'; seq: number; client: ClientRef; msg: ClientMessage }
  | { k: 'disconnect'; client: ClientRef }
  | { k: 'alive'; at: number; clients: number; controller: ControllerLiveness | null }
  | { k: 'stats'; seq: number; clients: ClientStat[]; snapshotsBuilt: number; snapshotsSent: number }
  | { k: 'handler_error'; message: string }
  | { k: 'closed' };
