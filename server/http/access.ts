// Who may talk to the daemon. Browsers apply no same-origin rule to WebSockets, so any page a user opens
// could try ws://127.0.0.1:PORT; a DNS-rebinding page could even make the browser send our Host. Three checks,
// all before the WebSocket handshake: the Host header names this daemon exactly, the Origin (when a browser
// sends one) is the daemon's own, and the per-launch token matches (constant-time comparison, never logged).

import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';

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
 * "127.0.0.1:8470", "localhost:8470", "[::1]:8470" and the bound address itself. No trailing dots, no
 * decimal or octal IPv4 forms, no other names: a rebinding attacker's name never matches.
 */
export function allowedHosts(bindHost: string, port: number): Set<string> {
  const hosts = new Set([`127.0.0.1:${port}`, `localhost:${port}`, `[::1]:${port}`]);
  if (bindHost !== '127.0.0.1' && bindHost !== '0.0.0.0' && bindHost !== '::') {
    hosts.add(bindHost.includes(':') ? `[${bindHost}]:${port}` : `${bindHost}:${port}`);
  }
  return hosts;
}

export function hostAllowed(hostHeader: string | undefined, allowed: Set<string>): boolean {
  if (!hostHeader) return false;
  return allowed.has(hostHeader.toLowerCase());
}

/** A browser's Origin must be http://<one of our hosts>. No Origin (curl, the CLI, tests) is allowed: the token still guards. */
export function originAllowed(origin: string | undefined, allowed: Set<string>): boolean {
  if (origin === undefined) return true;
  if (!origin.startsWith('http://')) return false;
  return allowed.has(origin.slice('http://'.length).toLowerCase());
}

/** Token from ?token= in a request URL. */
export function tokenFromUrl(url: string | undefined): string | null {
  if (!url) return null;
  try {
    return new URL(url, 'http://x').searchParams.get('token');
  } catch {
    return null;
  }
}

/** Token from a `ductbench_token` cookie, which the dashboard may set for itself. */
export function tokenFromCookie(cookie: string | undefined): string | null {
  if (!cookie) return null;
  for (const part of cookie.split(';')) {
    const [k, ...v] = part.trim().split('=');
    if (k === 'ductbench_token') return decodeURIComponent(v.join('='));
  }
  return null;
}
