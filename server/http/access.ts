// Who may talk to the daemon. Browsers apply no same-origin rule to WebSockets, so any page a user opens
// could try ws://127.0.0.1:PORT; a DNS-rebinding page could even make the browser send our Host. Three checks,
// all before the WebSocket handshake: the Host header names this daemon exactly, the Origin (when a browser
// sends one) is the daemon's own, and the per-launch token matches (constant-time comparison, never logged).

import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';
import { networkInterfaces, type NetworkInterfaceInfo } from 'node:os';

export type InterfaceList = NodeJS.Dict<NetworkInterfaceInfo[]>;

/**
 * The addresses a daemon bound to `bindHost` is reachable at: the address itself, or for a wildcard bind the
 * addresses of every interface (IPv4 ones for 0.0.0.0; IPv4 and IPv6 for ::, which takes both here). Read
 * once at start: an address an interface gains later is not answered to (restart the daemon).
 */
export function boundAddresses(bindHost: string, ifaces: InterfaceList = networkInterfaces()): string[] {
  if (bindHost !== '0.0.0.0' && bindHost !== '::') return [bindHost];
  const out: string[] = [];
  for (const list of Object.values(ifaces)) {
    for (const a of list ?? []) {
      if (a.family === 'IPv6' && bindHost !== '::') continue;
      // A link-local IPv6 address needs its zone in a URL, which no Host header carries: the bare address.
      out.push(a.address.split('%')[0].toLowerCase());
    }
  }
  return [...new Set(out)];
}

export function newToken(): string {
  return randomBytes(18).toString('base64url');
}

/** Constant-time token check: both sides are hashed first so their lengths leak nothing either. */
export function tokenMatches(expected: string, given: string | null | undefined): boolean {
  if (typeof given !== 'string' || given.length === 0 || given.length > 512) return false;
  const a = createHash('sha256').update(expected).digest();
  const b = createHash('sha256').update(given).digest();
  return timingSafeEqual(a, b);
}

/**
 * The Host values this daemon answers to, for a given bind address and port. Only canonical spellings:
 * "127.0.0.1:8470", "localhost:8470", "[::1]:8470" and the addresses it is bound to (boundAddresses: for
 * 0.0.0.0 those of every interface, so a LAN host can use the machine's address). No trailing dots, no
 * decimal or octal IPv4 forms, no other names: a rebinding attacker's name never matches.
 */
export function allowedHosts(bindHost: string, port: number, ifaces?: InterfaceList): Set<string> {
  const names = ['127.0.0.1', 'localhost', '::1', ...boundAddresses(bindHost, ifaces)];
  const hosts = new Set<string>();
  for (const n of names) {
    const h = n.includes(':') ? `[${n}]` : n;
    hosts.add(`${h}:${port}`);
    // A browser leaves the default port out of Host.
    if (port === 80) hosts.add(h);
  }
  return hosts;
}

// Every reader of a request header below is total: any value a client can send (absent, empty, repeated,
// malformed percent-encoding, non-ASCII) gives an answer, never an exception. A throw from the synchronous
// upgrade handler would leave the daemon's process, before the token was even checked.

export function hostAllowed(hostHeader: unknown, allowed: Set<string>): boolean {
  if (typeof hostHeader !== 'string' || hostHeader === '') return false;
  return allowed.has(hostHeader.toLowerCase());
}

/** A browser's Origin must be http://<one of our hosts>. No Origin (curl, the CLI, tests) is allowed: the token still guards. */
export function originAllowed(origin: unknown, allowed: Set<string>): boolean {
  if (origin === undefined) return true;
  if (typeof origin !== 'string') return false;
  if (!origin.startsWith('http://')) return false;
  return allowed.has(origin.slice('http://'.length).toLowerCase());
}

/** Token from ?token= in a request URL. */
export function tokenFromUrl(url: unknown): string | null {
  if (typeof url !== 'string' || url === '') return null;
  try {
    return new URL(url, 'http://x').searchParams.get('token');
  } catch {
    return null;
  }
}

/** Token from a `ductbench_token` cookie, which the dashboard may set for itself. */
export function tokenFromCookie(cookie: unknown): string | null {
  if (typeof cookie !== 'string' || cookie === '') return null;
  for (const part of cookie.split(';')) {
    const eq = part.indexOf('=');
    if (eq < 0 || part.slice(0, eq).trim() !== 'ductbench_token') continue;
    // A value that is not valid percent-encoding (`%`, `%zz`, a lone surrogate) is no token at all.
    try {
      return decodeURIComponent(part.slice(eq + 1).trim());
    } catch {
      return null;
    }
  }
  return null;
}

/** A bearer token from an Authorization header. */
export function tokenFromBearer(header: unknown): string | null {
  return typeof header === 'string' && header.startsWith('Bearer ') ? header.slice(7) : null;
}

/** The request target as a URL, or null for one that does not parse (`//[`, a bare `http://`). */
export function requestUrl(target: unknown): URL | null {
  try {
    return new URL(typeof target === 'string' && target !== '' ? target : '/', 'http://local');
  } catch {
    return null;
  }
}
