// The daemon's HTTP surface: the built dashboard as static files, a small token-guarded JSON API under /api/,
// and the WebSocket at /ws. Access checks (Host, Origin, token) happen on the raw upgrade request, before
// any WebSocket handshake, so a refused page never gets a socket to send on.

import { createReadStream, statSync } from 'node:fs';
import { createServer, type IncomingMessage, type Server, type ServerResponse } from 'node:http';
import type { Duplex } from 'node:stream';
import { extname, join, normalize, resolve, sep } from 'node:path';
import { WebSocketServer, type WebSocket } from 'ws';
import { MAX_CLIENT_MESSAGE_BYTES } from '../api/messages.js';
import { allowedHosts, hostAllowed, originAllowed, requestUrl, tokenFromBearer, tokenFromCookie, tokenFromUrl, tokenMatches } from './access.js';

const TYPES: Record<string, string> = {
  '.html': 'text/html; charset=utf-8',
  '.js': 'text/javascript; charset=utf-8',
  '.css': 'text/css; charset=utf-8',
  '.svg': 'image/svg+xml',
  '.png': 'image/png',
  '.ico': 'image/x-icon',
  '.json': 'application/json',
  '.map': 'application/json',
  '.woff2': 'font/woff2',
};

/** JSON (`body`), or text of another type (`text` with `contentType`; `download` names it as an attachment). */
export type ApiResult = { status: number; body: unknown } | { status: number; text: string; contentType: string; download?: string };

/** `params` holds the `:name` segments of a pattern key ("GET /api/sessions/:id"), decoded. */
export type ApiHandler = (req: IncomingMessage, url: URL, params: Record<string, string>) => Promise<ApiResult>;

interface Route {
  method: string;
  segments: string[];
  handler: ApiHandler;
}

/**
 * The `api` map's keys are "METHOD /path"; a segment written ":name" matches any one non-empty segment.
 * Exact keys win over patterns, and among patterns the one with fewer parameters (then the first declared).
 */
export function routeFor(api: Record<string, ApiHandler>, method: string, pathname: string): { handler: ApiHandler; params: Record<string, string> } | 'bad_path' | null {
  const exact = api[`${method} ${pathname}`];
  if (exact) return { handler: exact, params: {} };
  const parts = pathname.split('/');
  const routes: Route[] = [];
  for (const [key, handler] of Object.entries(api)) {
    const sp = key.indexOf(' ');
    if (!key.includes('/:')) continue;
    routes.push({ method: key.slice(0, sp), segments: key.slice(sp + 1).split('/'), handler });
  }
  routes.sort((a, b) => a.segments.filter((x) => x.startsWith(':')).length - b.segments.filter((x) => x.startsWith(':')).length);
  for (const r of routes) {
    if (r.method !== method || r.segments.length !== parts.length) continue;
    const params: Record<string, string> = {};
    let ok = true;
    for (let i = 0; i < parts.length && ok; i++) {
      const want = r.segments[i];
      if (want.startsWith(':')) {
        if (parts[i] === '') ok = false;
        else {
          try {
            params[want.slice(1)] = decodeURIComponent(parts[i]);
          } catch {
            return 'bad_path';
          }
        }
      } else ok = want === parts[i];
    }
    if (ok) return { handler: r.handler, params };
  }
  return null;
}

export interface HttpOptions {
  host: string;
  port: number;
  token: string;
  /** Folder of the built dashboard (dist/web). */
  webRoot: string;
  onSocket(ws: WebSocket, req: IncomingMessage): void;
  api?: Record<string, ApiHandler>;
  /** A handler failed (answered 500): for the log. */
  onHandlerError?(err: Error): void;
}

export interface HttpSurface {
  server: Server;
  port: number;
  close(): Promise<void>;
}

function refuseUpgrade(socket: Duplex, status: number, text: string): void {
  socket.end(`HTTP/1.1 ${status} ${text}\r\nConnection: close\r\nContent-Type: text/plain\r\nContent-Length: ${text.length}\r\n\r\n${text}`);
}

export async function startHttp(opts: HttpOptions): Promise<HttpSurface> {
  const wss = new WebSocketServer({ noServer: true, maxPayload: MAX_CLIENT_MESSAGE_BYTES });
  const root = resolve(opts.webRoot);
  let hosts = allowedHosts(opts.host, opts.port);

  const server = createServer((req, res) => {
    void handle(req, res).catch((err: Error) => {
      // A handler's own failure is this request's 500, never the daemon's: nothing here may throw again.
      try {
        if (!res.headersSent) res.writeHead(500, { 'content-type': 'text/plain' });
        res.end('internal error\n');
      } catch {
        res.destroy();
      }
      opts.onHandlerError?.(err);
    });
  });

  async function handle(req: IncomingMessage, res: ServerResponse): Promise<void> {
    if (!hostAllowed(req.headers.host, hosts)) {
      res.writeHead(421, { 'content-type': 'text/plain' }).end('misdirected request: unknown Host\n');
      return;
    }
    const url = requestUrl(req.url);
    if (!url) {
      res.writeHead(400, { 'content-type': 'text/plain' }).end('malformed request target\n');
      return;
    }
    if (url.pathname.startsWith('/api/')) {
      const given = tokenFromUrl(req.url) ?? tokenFromBearer(req.headers.authorization) ?? tokenFromCookie(req.headers.cookie);
      if (!tokenMatches(opts.token, given)) {
        res.writeHead(401, { 'content-type': 'application/json' }).end(JSON.stringify({ error: 'token required' }));
        return;
      }
      // A browser sends Origin on a state-changing fetch: only our own page may change sessions.
      if (req.method !== 'GET' && req.method !== 'HEAD' && !originAllowed(req.headers.origin, hosts)) {
        res.writeHead(403, { 'content-type': 'application/json' }).end(JSON.stringify({ error: 'foreign origin' }));
        return;
      }
      const route = routeFor(opts.api ?? {}, req.method ?? 'GET', url.pathname);
      if (route === 'bad_path') {
        res.writeHead(400, { 'content-type': 'application/json' }).end(JSON.stringify({ error: 'malformed path' }));
        return;
      }
      if (!route) {
        res.writeHead(404, { 'content-type': 'application/json' }).end(JSON.stringify({ error: 'no such endpoint' }));
        return;
      }
      const r = await route.handler(req, url, route.params);
      if ('text' in r) {
        res
          .writeHead(r.status, {
            'content-type': r.contentType,
            'cache-control': 'no-store',
            'x-content-type-options': 'nosniff',
            ...(r.download ? { 'content-disposition': `attachment; filename="${r.download.replace(/[^A-Za-z0-9._-]/g, '_')}"` } : {}),
            // A report opened from here runs nothing: it is inline SVG and text.
            ...(r.contentType.startsWith('text/html') ? { 'content-security-policy': "default-src 'none'; style-src 'unsafe-inline'; img-src data:" } : {}),
          })
          .end(r.text);
        return;
      }
      res.writeHead(r.status, { 'content-type': 'application/json', 'cache-control': 'no-store' }).end(JSON.stringify(r.body));
      return;
    }
    if (req.method !== 'GET' && req.method !== 'HEAD') {
      res.writeHead(405, { allow: 'GET, HEAD' }).end();
      return;
    }
    serveStatic(url.pathname, res);
  }

  function serveStatic(pathname: string, res: ServerResponse): void {
    let rel: string;
    try {
      rel = decodeURIComponent(pathname);
    } catch {
      res.writeHead(400).end();
      return;
    }
    if (rel.includes('\0')) {
      res.writeHead(400).end();
      return;
    }
    if (rel.endsWith('/')) rel += 'index.html';
    const file = normalize(join(root, rel));
    if (file !== root && !file.startsWith(root + sep)) {
      res.writeHead(403).end();
      return;
    }
    let size: number;
    try {
      const st = statSync(file);
      if (!st.isFile()) throw new Error('not a file');
      size = st.size;
    } catch {
      if (rel === '/index.html') {
        res.writeHead(503, { 'content-type': 'text/plain' }).end('dashboard not built: run `npm run build`\n');
      } else {
        res.writeHead(404, { 'content-type': 'text/plain' }).end('not found\n');
      }
      return;
    }
    res.writeHead(200, {
      'content-type': TYPES[extname(file)] ?? 'application/octet-stream',
      'content-length': size,
      'cache-control': file.endsWith('index.html') ? 'no-store' : 'max-age=3600',
      'x-content-type-options': 'nosniff',
      'referrer-policy': 'no-referrer',
      'content-security-policy': "default-src 'self'; connect-src 'self'; img-src 'self' data: blob:; style-src 'self' 'unsafe-inline'; frame-ancestors 'none'",
    });
    createReadStream(file).pipe(res);
  }

  // The upgrade handler runs synchronously inside the HTTP parser's callback: an exception here would leave
  // the process. The checks are total; the try is the belt to those braces.
  server.on('upgrade', (req: IncomingMessage, socket: Duplex, head: Buffer) => {
    socket.on('error', () => socket.destroy());
    try {
      const url = requestUrl(req.url);
      if (!url) return refuseUpgrade(socket, 400, 'Bad Request');
      if (url.pathname !== '/ws') return refuseUpgrade(socket, 404, 'Not Found');
      if (!hostAllowed(req.headers.host, hosts)) return refuseUpgrade(socket, 421, 'Misdirected Request');
      if (!originAllowed(req.headers.origin, hosts)) return refuseUpgrade(socket, 403, 'Forbidden');
      const given = tokenFromUrl(req.url) ?? tokenFromCookie(req.headers.cookie);
      if (!tokenMatches(opts.token, given)) return refuseUpgrade(socket, 401, 'Unauthorized');
      wss.handleUpgrade(req, socket, head, (ws) => opts.onSocket(ws, req));
    } catch (err) {
      try {
        refuseUpgrade(socket, 500, 'Internal Server Error');
      } catch {
        socket.destroy();
      }
      opts.onHandlerError?.(err as Error);
    }
  });

  await new Promise<void>((res, rej) => {
    server.once('error', rej);
    server.listen(opts.port, opts.host, () => {
      server.off('error', rej);
      res();
    });
  });
  const addr = server.address();
  const port = typeof addr === 'object' && addr ? addr.port : opts.port;
  hosts = allowedHosts(opts.host, port);

  return {
    server,
    port,
    close: () =>
      new Promise<void>((res) => {
        for (const ws of wss.clients) ws.terminate();
        wss.close();
        server.closeAllConnections();
        server.close(() => res());
      }),
  };
}

