// The dashboard's connection lifecycle as one explicit state machine: string-literal states, one transition
// function, a reason on every state. Pure (the client passes the clock in), tested in test/web-data.test.ts.

export type ConnectionState =
  | 'no_token' // the page was opened without ?token= and none is remembered: nothing to try
  | 'connecting' // a socket is being opened
  | 'syncing' // open, waiting for the snapshot
  | 'live' // snapshot received; incremental messages flow
  | 'waiting' // closed; the next attempt is scheduled at retryAt
  | 'refused' // the daemon refused us for a reason a retry cannot fix (bad token, other API version)
  | 'stopped'; // closed on purpose (page going away, tests)

export interface ConnectionView {
  state: ConnectionState;
  /** For people. */
  reason: string;
  /** Failed attempts since the last snapshot; drives the back-off. */
  failures: number;
  /** When the next attempt starts (ms, the client's clock), in state 'waiting'. */
  retryAt: number | null;
  /** Close code of the last socket, if any. */
  lastCode: number | null;
}

export type ConnectionEvent =
  | { kind: 'connect' }
  | { kind: 'open' }
  | { kind: 'snapshot' }
  | { kind: 'closed'; code: number; reason: string }
  | { kind: 'incompatible'; message: string }
  | { kind: 'stop' };

/** Close code the daemon uses after the upgrade for a refused token (before the upgrade it answers HTTP 401). */
export const CLOSE_TOKEN_REFUSED = 4401;
/** Our own close code when the daemon has gone silent (no answer to pings). */
export const CLOSE_STALE = 4000;

export interface Backoff {
  firstMs: number;
  maxMs: number;
}
export const DEFAULT_BACKOFF: Backoff = { firstMs: 500, maxMs: 10_000 };

/** 0.5 s, 1 s, 2 s, ... capped: quick after a daemon restart, quiet when it is gone for long. */
export function backoffDelay(failures: number, b: Backoff = DEFAULT_BACKOFF): number {
  const n = Math.max(1, failures);
  return Math.min(b.maxMs, b.firstMs * 2 ** Math.min(n - 1, 30));
}

export function initialConnection(hasToken: boolean): ConnectionView {
  return hasToken
    ? { state: 'stopped', reason: 'not started', failures: 0, retryAt: null, lastCode: null }
    : { state: 'no_token', reason: 'no token: open the dashboard with the address the daemon printed (it ends in ?token=...)', failures: 0, retryAt: null, lastCode: null };
}

/** Why a socket closed, in words, given the state it closed in. */
export function closeReason(code: number, reason: string, from: ConnectionState): string {
  if (code === CLOSE_TOKEN_REFUSED) return 'token refused: open the dashboard with the address the daemon printed';
  if (code === CLOSE_STALE) return 'no answer from the daemon: reconnecting';
  // A browser cannot see the HTTP 401 the daemon answers a bad token with: the socket just closes (1006)
  // before it ever opened, exactly as when nothing listens. Say both.
  if (from === 'connecting') return 'could not connect: check the token in the URL, and that the daemon is running';
  if (code === 1001) return 'the daemon went away (stopped or restarting)';
  if (code === 1006) return 'connection lost';
  return `closed by the daemon (code ${code}${reason ? `: ${reason}` : ''})`;
}

export function nextConnection(v: ConnectionView, e: ConnectionEvent, now: number, b: Backoff = DEFAULT_BACKOFF): ConnectionView {
  switch (e.kind) {
    case 'connect':
      if (v.state === 'no_token' || v.state === 'refused') return v;
      if (v.state === 'connecting' || v.state === 'syncing' || v.state === 'live') return v;
      return { ...v, state: 'connecting', reason: v.failures > 0 ? `${v.reason}; trying again` : 'connecting', retryAt: null };
    case 'open':
      if (v.state !== 'connecting') return v;
      return { ...v, state: 'syncing', reason: 'connected, waiting for the snapshot' };
    case 'snapshot':
      if (v.state !== 'syncing' && v.state !== 'live') return v;
      return { ...v, state: 'live', reason: 'live', failures: 0, lastCode: null };
    case 'closed': {
      if (v.state !== 'connecting' && v.state !== 'syncing' && v.state !== 'live') return v;
      const reason = closeReason(e.code, e.reason, v.state);
      if (e.code === CLOSE_TOKEN_REFUSED) return { ...v, state: 'refused', reason, retryAt: null, lastCode: e.code };
      const failures = v.failures + 1;
      return { state: 'waiting', reason, failures, retryAt: now + backoffDelay(failures, b), lastCode: e.code };
    }
    case 'incompatible':
      if (v.state === 'stopped' || v.state === 'no_token') return v;
      return { ...v, state: 'refused', reason: e.message, retryAt: null };
    case 'stop':
      if (v.state === 'no_token' || v.state === 'stopped') return v;
      return { ...v, state: 'stopped', reason: 'closed', retryAt: null };
  }
}
