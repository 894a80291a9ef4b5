// The dashboard's one data layer: owns the WebSocket to the daemon, takes the snapshot and then the
// incremental messages, keeps the samples in a ring, sends commands and matches their replies. Components
// only read from it and subscribe; none of them touches the socket. No DOM use here, so the node tests drive
// it with a fake socket.

import {
  API_VERSION,
  type BenchEvent,
  type BenchView,
  type CalibrationHistoryView,
  type CalibrationStatusView,
  type ClientMessage,
  type DeviceIdentity,
  type LinkView,
  type Role,
  type RunPointView,
  type SequenceIssueView,
  type SequenceRunView,
  type ServerMessage,
  type Snapshot,
} from '../../../server/api/messages.js';
import { DEFAULT_BACKOFF, initialConnection, nextConnection, CLOSE_STALE, type Backoff, type ConnectionEvent, type ConnectionView } from './connection.js';
import { SampleRing, DEFAULT_RING_CAPACITY } from './ring.js';

/** What the client needs of a WebSocket; the browser's WebSocket fits, and so does the tests' fake. */
export interface SocketLike {
  readonly readyState: number;
  send(data: string): void;
  close(code?: number, reason?: string): void;
  onopen: ((ev: unknown) => void) | null;
  onmessage: ((ev: { data: unknown }) => void) | null;
  onclose: ((ev: { code: number; reason: string }) => void) | null;
  onerror: ((ev: unknown) => void) | null;
}
export type SocketFactory = (url: string) => SocketLike;

/** WebSocket.OPEN, spelled out so this module needs no DOM globals. */
const OPEN = 1;

export type ClientChange = 'connection' | 'snapshot' | 'samples' | 'bench' | 'link' | 'identity' | 'events' | 'extras' | 'command' | 'run' | 'role';
export type ClientListener = (change: ClientChange) => void;

/** `data`: what the daemon answered with; `issues`: field-level problems of a refused sequence. */
export type CommandResult = { ok: true; data?: unknown } | { ok: false; error: string; issues?: SequenceIssueView[] };

/** The sequence run as the dashboard keeps it: the latest view and every point so far. */
export type RunState = SequenceRunView & { points: RunPointView[] };
/** A client message as the caller writes it: the client adds the id. */
export type Command = ClientMessage extends infer M ? (M extends ClientMessage ? Omit<M, 'id'> : never) : never;

export interface LastCommand {
  type: ClientMessage['type'];
  at: number;
  result: CommandResult | null; // null while waiting for the reply
}

export interface BenchClientOptions {
  url: string | null;
  socketFactory: SocketFactory;
  ringCapacity?: number;
  backoff?: Backoff;
  /** A command without a reply after this long is reported as failed (the daemon may still have acted). */
  replyTimeoutMs?: number;
  /** Silence after which the client pings, and after which it gives the socket up. */
  pingAfterMs?: number;
  staleAfterMs?: number;
  maxEvents?: number;
  now?: () => number;
}

/** How often the page says it is alive (ms); the daemon treats 4 s of silence from a controller as a frozen page. */
const HEARTBEAT_MS = 1000;

export class BenchClient {
  readonly ring: SampleRing;
  private _conn: ConnectionView;
  private _role: Role = 'viewer';
  /** A takeover request this (controlling) dashboard has been asked to answer, or null. */
  private _takeoverAsked: { request: number; from: number } | null = null;
  private _bench: BenchView | null = null;
  private _link: LinkView | null = null;
  private _identity: DeviceIdentity | null = null;
  private _events: BenchEvent[] = [];
  private _extras: Record<string, unknown> = {};
  private _run: RunState | null = null;
  private _lastCommand: LastCommand | null = null;
  private _badMessages = 0;
  private _messages = 0;

  private _socket: SocketLike | null = null;
  private _retryTimer: ReturnType<typeof setTimeout> | null = null;
  private _watchTimer: ReturnType<typeof setInterval> | null = null;
  private _lastHeard = 0;
  private _lastPing = 0;
  private _nextId = 1;
  private readonly _pending = new Map<number, { resolve: (r: CommandResult) => void; timer: ReturnType<typeof setTimeout> }>();
  private readonly _listeners = new Set<ClientListener>();
  private readonly _now: () => number;
  private readonly _o: Required<Omit<BenchClientOptions, 'url' | 'socketFactory' | 'now'>>;

  constructor(private readonly _opts: BenchClientOptions) {
    this._now = _opts.now ?? (() => Date.now());
    this._o = {
      ringCapacity: _opts.ringCapacity ?? DEFAULT_RING_CAPACITY,
      backoff: _opts.backoff ?? DEFAULT_BACKOFF,
      replyTimeoutMs: _opts.replyTimeoutMs ?? 5000,
      pingAfterMs: _opts.pingAfterMs ?? 5000,
      staleAfterMs: _opts.staleAfterMs ?? 15000,
      maxEvents: _opts.maxEvents ?? 200,
    };
    this.ring = new SampleRing(this._o.ringCapacity);
    this._conn = initialConnection(_opts.url !== null);
  }

  // ---- what components read ----
  get connection(): ConnectionView {
    return this._conn;
  }
  /** Another dashboard asks this one for control (answer with answerTakeover). */
  get takeoverAsked(): { request: number; from: number } | null {
    return this._takeoverAsked;
  }

  /** Asks the controlling dashboard for control (granted at once when nobody holds it). */
  requestTakeover(): Promise<CommandResult> {
    return this.send({ type: 'takeover_request' } as Command);
  }

  answerTakeover(allow: boolean): Promise<CommandResult> {
    const t = this._takeoverAsked;
    this._takeoverAsked = null;
    this._emit('role');
    if (!t) return Promise.resolve({ ok: false, error: 'no takeover request to answer' });
    return this.send({ type: 'takeover_answer', request: t.request, allow } as Command);
  }

  get role(): Role {
    return this._role;
  }
  get bench(): BenchView | null {
    return this._bench;
  }
  get link(): LinkView | null {
    return this._link;
  }
  get identity(): DeviceIdentity | null {
    return this._identity;
  }
  get events(): readonly BenchEvent[] {
    return this._events;
  }
  get extras(): Readonly<Record<string, unknown>> {
    return this._extras;
  }
  /** The sequence run in progress, or the last one this daemon session ran, or null. */
  get run(): RunState | null {
    return this._run;
  }
  /** Calibration state from the daemon (extras.calibration), or null from a daemon without it. */
  get calibration(): CalibrationStatusView | null {
    const c = this._extras.calibration as CalibrationStatusView | undefined;
    return c && typeof c === 'object' && Array.isArray(c.warnings) ? c : null;
  }
  /** The dated calibration history (extras.calibration_history), or null. */
  get calibrationHistory(): CalibrationHistoryView | null {
    const h = this._extras.calibration_history as CalibrationHistoryView | undefined;
    return h && typeof h === 'object' && Array.isArray(h.entries) ? h : null;
  }
  get lastCommand(): LastCommand | null {
    return this._lastCommand;
  }
  get badMessages(): number {
    return this._badMessages;
  }
  get messages(): number {
    return this._messages;
  }
  /** True when control commands can be sent: live, and this dashboard holds the controller role. */
  get canControl(): boolean {
    return this._conn.state === 'live' && this._role === 'controller';
  }

  subscribe(listener: ClientListener): () => void {
    this._listeners.add(listener);
    return () => {
      this._listeners.delete(listener);
    };
  }

  // ---- lifecycle ----
  start(): void {
    this._connect();
  }

  /** Closes for good (page unload, tests). Pending commands are answered as failed. */
  close(): void {
    this._clearRetry();
    this._dropSocket(1000, 'dashboard closed');
    this._transition({ kind: 'stop' });
  }

  // ---- commands ----
  /**
   * Emergency stop. Sent the moment the socket is open, even before the snapshot and whatever the role:
   * anyone may stop the motor, and nothing waits in a queue ahead of it.
   */
  stop(): Promise<CommandResult> {
    return this._send({ type: 'stop' }, true);
  }

  send(cmd: Command): Promise<CommandResult> {
    // Stop, ping and the takeover messages go whatever this dashboard's role (the daemon checks the rest).
    return this._send(cmd, cmd.type === 'stop' || cmd.type === 'ping' || cmd.type === 'takeover_request' || cmd.type === 'takeover_answer');
  }

  private _send(cmd: Command, anyState: boolean): Promise<CommandResult> {
    const sock = this._socket;
    const at = this._now();
    const fail = (error: string): Promise<CommandResult> => {
      const result: CommandResult = { ok: false, error };
      if (cmd.type !== 'ping') this._noteCommand({ type: cmd.type, at, result });
      return Promise.resolve(result);
    };
    if (!sock || sock.readyState !== OPEN) return fail('not connected: the command did not reach the daemon');
    if (!anyState && this._conn.state !== 'live') return fail('not in sync with the daemon yet');
    if (!anyState && this._role !== 'controller') return fail('this dashboard is a viewer: controls belong to another dashboard');
    const id = this._nextId++;
    try {
      sock.send(JSON.stringify({ ...cmd, id }));
    } catch (err) {
      return fail(`send failed: ${err instanceof Error ? err.message : String(err)}`);
    }
    if (cmd.type !== 'ping') this._noteCommand({ type: cmd.type, at, result: null });
    return new Promise<CommandResult>((resolve) => {
      const timer = setTimeout(() => {
        this._pending.delete(id);
        const result: CommandResult = { ok: false, error: `no reply within ${Math.round(this._o.replyTimeoutMs / 1000)} s` };
        if (cmd.type !== 'ping') this._noteCommand({ type: cmd.type, at, result });
        resolve(result);
      }, this._o.replyTimeoutMs);
      this._pending.set(id, {
        timer,
        resolve: (result) => {
          if (cmd.type !== 'ping') this._noteCommand({ type: cmd.type, at, result });
          resolve(result);
        },
      });
    });
  }

  private _noteCommand(c: LastCommand): void {
    this._lastCommand = c;
    this._emit('command');
  }

  // ---- socket handling ----
  private _connect(): void {
    if (this._opts.url === null) return;
    const before = this._conn.state;
    this._transition({ kind: 'connect' });
    if (this._conn.state !== 'connecting' || before === 'connecting') return;
    let sock: SocketLike;
    try {
      sock = this._opts.socketFactory(this._opts.url);
    } catch (err) {
      this._transition({ kind: 'closed', code: 1006, reason: err instanceof Error ? err.message : String(err) });
      this._scheduleRetry();
      return;
    }
    this._socket = sock;
    sock.onopen = () => {
      if (this._socket !== sock) return;
      this._lastHeard = this._now();
      this._transition({ kind: 'open' });
      this._startWatch();
    };
    sock.onmessage = (ev) => {
      if (this._socket !== sock) return;
      this.handleMessage(ev.data);
    };
    sock.onerror = () => {
      // The close event follows and carries what little the browser tells us.
    };
    sock.onclose = (ev) => {
      if (this._socket !== sock) return;
      this._socketGone(ev.code, ev.reason);
    };
  }

  private _socketGone(code: number, reason: string): void {
    this._socket = null;
    this._stopWatch();
    this._failPending('connection lost before the reply');
    this._transition({ kind: 'closed', code, reason });
    this._scheduleRetry();
  }

  /** Detaches first: a socket to a silent peer can take long to report its close, and we are done with it. */
  private _dropSocket(code: number, reason: string): void {
    const sock = this._socket;
    if (!sock) return;
    this._socket = null;
    sock.onopen = sock.onmessage = sock.onclose = sock.onerror = null;
    try {
      sock.close(code, reason);
    } catch {
      // Already closing.
    }
    this._stopWatch();
    this._failPending('connection closed before the reply');
  }

  private _scheduleRetry(): void {
    this._clearRetry();
    if (this._conn.state !== 'waiting' || this._conn.retryAt === null) return;
    const delay = Math.max(0, this._conn.retryAt - this._now());
    this._retryTimer = setTimeout(() => {
      this._retryTimer = null;
      this._connect();
    }, delay);
  }

  private _clearRetry(): void {
    if (this._retryTimer !== null) clearTimeout(this._retryTimer);
    this._retryTimer = null;
  }

  private _startWatch(): void {
    this._stopWatch();
    const tick = Math.max(100, Math.min(this._o.pingAfterMs, 1000));
    this._watchTimer = setInterval(() => this._watch(), tick);
  }

  private _stopWatch(): void {
    if (this._watchTimer !== null) clearInterval(this._watchTimer);
    this._watchTimer = null;
  }

  /** A half-open TCP connection looks open for minutes; silence plus an unanswered ping tells us sooner. */
  private _watch(): void {
    const silent = this._now() - this._lastHeard;
    if (silent >= this._o.staleAfterMs) {
      this._dropSocket(CLOSE_STALE, 'no data');
      this._transition({ kind: 'closed', code: CLOSE_STALE, reason: 'no data' });
      this._scheduleRetry();
      return;
    }
    // A ping every second is the page's heartbeat: a controlling page that stops sending it while the motor
    // may turn (a frozen tab) is stopped by the daemon. It also keeps the stale check above honest.
    if (this._now() - this._lastPing >= Math.min(this._o.pingAfterMs, HEARTBEAT_MS)) {
      this._lastPing = this._now();
      void this._send({ type: 'ping' }, true);
    }
  }

  private _failPending(error: string): void {
    for (const [id, p] of this._pending) {
      clearTimeout(p.timer);
      this._pending.delete(id);
      p.resolve({ ok: false, error });
    }
  }

  // ---- messages ----
  /** Takes one text frame from the daemon. Public so tests can feed frames without a socket. */
  handleMessage(data: unknown): void {
    this._lastHeard = this._now();
    let msg: ServerMessage;
    try {
      if (typeof data !== 'string') throw new Error('not text');
      msg = JSON.parse(data) as ServerMessage;
      if (typeof msg !== 'object' || msg === null || typeof (msg as { type?: unknown }).type !== 'string') throw new Error('no type');
    } catch {
      this._badMessages++;
      return;
    }
    this._messages++;
    switch (msg.type) {
      case 'snapshot':
        this._takeSnapshot(msg);
        return;
      case 'samples':
        if (this._conn.state !== 'live') return; // before the snapshot these would be out of context
        if (this.ring.append(msg.batch) > 0) this._emit('samples');
        return;
      case 'bench':
        this._bench = msg.bench;
        this._emit('bench');
        return;
      case 'role':
        this._role = msg.role === 'controller' ? 'controller' : 'viewer';
        if (this._role === 'viewer') this._takeoverAsked = null;
        this._emit('role');
        return;
      case 'takeover_asked':
        this._takeoverAsked = { request: msg.request, from: msg.from };
        this._emit('role');
        return;
      case 'link':
        this._link = msg.link;
        this._emit('link');
        return;
      case 'identity':
        this._identity = msg.identity;
        this._emit('identity');
        return;
      case 'event':
        this._pushEvent(msg.event);
        this._emit('events');
        return;
      case 'extras':
        this._extras = { ...this._extras, ...(msg.extras ?? {}) };
        this._emit('extras');
        return;
      case 'run': {
        const v = msg.run;
        if (!v || typeof v !== 'object') return;
        // A new run starts with no points; the same run keeps those it has.
        const points = this._run && this._run.run === v.run ? this._run.points : [];
        this._run = { ...v, points: Array.isArray(v.points) ? v.points : points };
        this._emit('run');
        return;
      }
      case 'run_point': {
        if (!this._run || this._run.run !== msg.run) return; // a point of a run we have no view of yet
        if (!this._run.points.some((p) => p.index === msg.point.index && p.t_start === msg.point.t_start)) {
          this._run = { ...this._run, points: [...this._run.points, msg.point] };
        }
        this._emit('run');
        return;
      }
      case 'reply': {
        const p = this._pending.get(msg.id);
        if (!p) return; // a late reply after our time-out, or a ping we gave up on
        this._pending.delete(msg.id);
        clearTimeout(p.timer);
        p.resolve(
          msg.ok
            ? msg.data === undefined
              ? { ok: true }
              : { ok: true, data: msg.data }
            : Array.isArray(msg.issues)
              ? { ok: false, error: msg.error, issues: msg.issues }
              : { ok: false, error: msg.error },
        );
        return;
      }
      default:
        this._badMessages++;
    }
  }

  private _takeSnapshot(s: Snapshot): void {
    if (s.api !== API_VERSION) {
      this._transition({ kind: 'incompatible', message: `the daemon speaks API version ${String(s.api)}, this dashboard ${API_VERSION}: reload the page (or rebuild the dashboard)` });
      this._dropSocket(1000, 'incompatible API');
      return;
    }
    this._role = s.role === 'controller' ? 'controller' : 'viewer';
    this._bench = s.bench ?? null;
    this._link = s.link ?? null;
    this._identity = s.identity ?? null;
    this._events = [];
    for (const e of s.events ?? []) this._pushEvent(e);
    this._extras = { ...(s.extras ?? {}) };
    const r = s.run;
    this._run = r && typeof r === 'object' ? { ...r, points: Array.isArray(r.points) ? r.points : [] } : null;
    // The snapshot's history replaces what we had: after a reconnect our copy has a hole of unknown size.
    this.ring.clear();
    if (s.history) this.ring.append(s.history);
    this._transition({ kind: 'snapshot' });
    this._emit('snapshot');
  }

  private _pushEvent(e: BenchEvent): void {
    this._events.push(e);
    if (this._events.length > this._o.maxEvents) this._events.splice(0, this._events.length - this._o.maxEvents);
  }

  private _transition(e: ConnectionEvent): void {
    const next = nextConnection(this._conn, e, this._now(), this._o.backoff);
    if (next === this._conn) return;
    this._conn = next;
    this._emit('connection');
  }

  private _emit(change: ClientChange): void {
    for (const l of [...this._listeners]) {
      try {
        l(change);
      } catch (err) {
        // One broken panel must not stop the others (or the stop button) from updating.
        console.error('dashboard listener failed', err);
      }
    }
  }
}
