// The parts library over HTTP (token-guarded like all of /api/), read-only: the dashboard changes parts and
// mounts through WebSocket commands (control role, refusals while armed); these are for lists and for tools
// that look back, such as which sessions ran with a part revision (GET /api/sessions?part=ID@REV).

import { PartNotFound, type PartsLibrary } from '../parts/library.js';
import { PART_KINDS, type PartKind } from '../parts/types.js';
import type { ApiHandler } from './server.js';

const LIST_PARAMS = new Set(['token', 'kind', 'retired']);

export function partsApi(lib: PartsLibrary): Record<string, ApiHandler> {
  return {
    'GET /api/parts': async (_req, url) => {
      const q = url.searchParams;
      for (const k of q.keys()) if (!LIST_PARAMS.has(k)) return { status: 400, body: { error: `unknown parameter ${JSON.stringify(k)} (known: kind, retired)`, field: k } };
      const kind = q.get('kind');
      if (kind !== null && !(PART_KINDS as readonly string[]).includes(kind)) return { status: 400, body: { error: `kind must be one of ${PART_KINDS.join(', ')}`, field: 'kind' } };
      const retired = q.get('retired');
      if (retired !== null && retired !== '0' && retired !== '1') return { status: 400, body: { error: 'retired must be 0 or 1', field: 'retired' } };
      return { status: 200, body: { parts: lib.list({ ...(kind ? { kind: kind as PartKind } : {}), retired: retired === '1' }) } };
    },
    'GET /api/parts/:id': async (_req, _url, p) => {
      if (p.id === undefined || !/^[1-9][0-9]{0,15}$/.test(p.id)) return { status: 400, body: { error: 'id must be a positive whole number', field: 'id' } };
      const id = Number(p.id);
      try {
        return { status: 200, body: { revisions: lib.history(id), sessions: lib.sessionsUsing(id) } };
      } catch (err) {
        if (err instanceof PartNotFound) return { status: 404, body: { error: err.message } };
        throw err;
      }
    },
  };
}
