// The recorded sessions over HTTP (token-guarded like all of /api/): list with filters, one session, its
// samples thinned for a plot, edit, delete, compare against a baseline with an optional vehicle verdict, the
// self-contained HTML reports, and CSV/JSON export. Input is validated and refused with the parameter named;
// nothing is guessed.

import type { IncomingMessage } from 'node:http';
import { compareSessions } from '../compare/compare.js';
import { renderComparisonReport, renderSessionReport } from '../compare/report.js';
import { validateVehicle, type VehicleSpec } from '../compare/vehicle.js';
import { InvalidInput, SessionNotFound } from '../store/errors.js';
import { exportToString, writeCsv, writeJson } from '../store/exchange.js';
import type { SessionStore } from '../store/store.js';
import { SESSION_OUTCOMES, type ListFilter, type SessionOutcome } from '../store/types.js';
import type { ApiHandler, ApiResult } from './server.js';

/** Largest PATCH body accepted, bytes. */
export const MAX_BODY_BYTES = 64 * 1024;
/** Default and largest point count for /samples. */
export const DEFAULT_SAMPLE_POINTS = 2000;
export const MAX_SAMPLE_POINTS = 20_000;
const MAX_COMPARE = 20;
const PATCH_KEYS = ['title', 'notes', 'tags', 'addTags', 'removeTags'] as const;

/** A refusal of the request as written (400), naming the parameter. */
export class BadRequest extends Error {
  constructor(
    message: string,
    readonly field: string | null = null,
  ) {
    super(message);
  }
}

export interface SessionsApiDeps {
  store: SessionStore;
  /** Id of the session being recorded right now, if any (it cannot be deleted). */
  recordingId: () => number | null;
}

function parseId(raw: string | undefined, field = 'id'): number {
  if (raw === undefined || !/^[1-9][0-9]{0,15}$/.test(raw)) throw new BadRequest(`${field} must be a positive whole number`, field);
  return Number(raw);
}

function parseIds(raw: string | null): number[] {
  if (raw === null || raw.trim() === '') throw new BadRequest('ids is required: a comma-separated list of session ids, baseline first', 'ids');
  const ids = raw.split(',').map((p) => parseId(p.trim(), 'ids'));
  if (ids.length < 2) throw new BadRequest('ids needs a baseline and at least one other session', 'ids');
  if (ids.length > MAX_COMPARE) throw new BadRequest(`ids: at most ${MAX_COMPARE} sessions`, 'ids');
  if (new Set(ids).size !== ids.length) throw new BadRequest('ids names a session twice', 'ids');
  return ids;
}

/** A date as YYYY-MM-DD (UTC midnight), an ISO timestamp, or ms since the epoch. */
function parseTime(raw: string, field: string): number {
  const t = /^[0-9]{1,15}$/.test(raw) ? Number(raw) : /^\d{4}-\d{2}-\d{2}/.test(raw) ? Date.parse(raw) : NaN;
  if (!Number.isFinite(t)) throw new BadRequest(`${field} must be a date (YYYY-MM-DD), an ISO time or milliseconds since 1970`, field);
  return t;
}

function parseNumber(raw: string, field: string, min: number, max: number, integer = false): number {
  const n = Number(raw);
  if (raw.trim() === '' || !Number.isFinite(n) || n < min || n > max || (integer && !Number.isInteger(n))) {
    throw new BadRequest(`${field} must be ${integer ? 'a whole number' : 'a number'} from ${min} to ${max}`, field);
  }
  return n;
}

const LIST_PARAMS = new Set(['token', 'tag', 'text', 'rig', 'part', 'outcome', 'from', 'to', 'limit', 'offset']);

export function listFilter(q: URLSearchParams): ListFilter {
  for (const k of q.keys()) if (!LIST_PARAMS.has(k)) throw new BadRequest(`unknown parameter ${JSON.stringify(k)} (known: ${[...LIST_PARAMS].filter((p) => p !== 'token').join(', ')})`, k);
  const f: ListFilter = {};
  const tags = q.getAll('tag').flatMap((t) => t.split(',')).map((t) => t.trim()).filter((t) => t !== '');
  if (tags.length) f.tag = tags;
  const text = q.get('text');
  if (text) f.text = text;
  const rig = q.get('rig');
  if (rig) f.rig = rig;
  const part = q.get('part');
  if (part) {
    // A library part, or one revision of it: part=12 or part=12@3.
    const m = /^([1-9][0-9]{0,15})(?:@([1-9][0-9]{0,8}))?$/.exec(part);
    if (!m) throw new BadRequest('part must be a part id, optionally @revision (e.g. 12 or 12@3)', 'part');
    f.part = Number(m[1]);
    if (m[2] !== undefined) f.partRevision = Number(m[2]);
  }
  const outcome = q.get('outcome');
  if (outcome) {
    const outs = outcome.split(',').map((o) => o.trim());
    for (const o of outs) if (!SESSION_OUTCOMES.includes(o as SessionOutcome)) throw new BadRequest(`outcome ${JSON.stringify(o)} is not one of ${SESSION_OUTCOMES.join(', ')}`, 'outcome');
    f.outcome = outs as SessionOutcome[];
  }
  const from = q.get('from');
  if (from) f.from = parseTime(from, 'from');
  const to = q.get('to');
  if (to) {
    // A bare date as the upper end means "through that day".
    f.to = parseTime(to, 'to') + (/^\d{4}-\d{2}-\d{2}$/.test(to) ? 86_400_000 : 0);
  }
  const limit = q.get('limit');
  f.limit = limit ? parseNumber(limit, 'limit', 1, 1000, true) : 200;
  const offset = q.get('offset');
  if (offset) f.offset = parseNumber(offset, 'offset', 0, 1e9, true);
  return f;
}

function vehicleFrom(q: URLSearchParams): VehicleSpec | undefined {
  const keys = ['mass', 'motors', 'battery_wh'];
  const given = keys.filter((k) => q.get(k) !== null && q.get(k) !== '');
  if (given.length === 0) return undefined;
  if (given.length < keys.length) throw new BadRequest(`the vehicle verdict needs all of mass, motors and battery_wh (missing ${keys.filter((k) => !given.includes(k)).join(', ')})`, keys.find((k) => !given.includes(k)) ?? null);
  const v: VehicleSpec = {
    mass_kg: parseNumber(q.get('mass')!, 'mass', 0.001, 1000),
    motors: parseNumber(q.get('motors')!, 'motors', 1, 64, true),
    battery_wh: parseNumber(q.get('battery_wh')!, 'battery_wh', 0.001, 100_000),
  };
  try {
    validateVehicle(v);
  } catch (err) {
    throw new BadRequest((err as Error).message, 'mass');
  }
  return v;
}

async function readJsonBody(req: IncomingMessage): Promise<unknown> {
  const type = req.headers['content-type'] ?? '';
  if (!type.startsWith('application/json')) throw new BadRequest('the body must be JSON (content-type: application/json)', null);
  const chunks: Buffer[] = [];
  let size = 0;
  for await (const c of req as AsyncIterable<Buffer>) {
    size += c.length;
    if (size > MAX_BODY_BYTES) throw new BadRequest(`the body is larger than ${MAX_BODY_BYTES} bytes`, null);
    chunks.push(c);
  }
  try {
    return JSON.parse(Buffer.concat(chunks).toString('utf8')) as unknown;
  } catch {
    throw new BadRequest('the body is not valid JSON', null);
  }
}

function stringList(v: unknown, field: string): string[] {
  if (!Array.isArray(v) || v.length > 50 || v.some((t) => typeof t !== 'string' || t.trim() === '' || t.length > 64)) {
    throw new BadRequest(`${field} must be a list of at most 50 non-empty strings of at most 64 characters`, field);
  }
  return v as string[];
}

/** The handlers, keyed as the HTTP server's `api` map wants them. */
export function sessionsApi(d: SessionsApiDeps): Record<string, ApiHandler> {
  const { store } = d;
  // Errors of the request and of the store become status codes; anything else is a 500 from the server.
  const guard =
    (fn: ApiHandler): ApiHandler =>
    async (req, url, params) => {
      try {
        return await fn(req, url, params);
      } catch (err) {
        if (err instanceof BadRequest) return { status: 400, body: { error: err.message, field: err.field } };
        if (err instanceof SessionNotFound) return { status: 404, body: { error: err.message } };
        if (err instanceof InvalidInput) return { status: 400, body: { error: err.message, field: null } };
        throw err;
      }
    };
  const json = (body: unknown, status = 200): ApiResult => ({ status, body });

  return {
    'GET /api/sessions': guard(async (_req, url) => json({ sessions: store.list(listFilter(url.searchParams)) })),

    'GET /api/sessions/:id': guard(async (_req, _url, p) => json({ session: store.get(parseId(p.id)) })),

    'GET /api/sessions/:id/samples': guard(async (_req, url, p) => {
      const id = parseId(p.id);
      const raw = url.searchParams.get('points');
      const points = raw ? parseNumber(raw, 'points', 2, MAX_SAMPLE_POINTS, true) : DEFAULT_SAMPLE_POINTS;
      // Min/max per bucket on thrust keeps the peaks a plot of a sweep is read for.
      return json({ session: id, points, samples: store.samples(id, { decimate: { method: 'minmax', points, channel: 'thrust' } }) });
    }),

    'PATCH /api/sessions/:id': guard(async (req, _url, p) => {
      const id = parseId(p.id);
      const body = await readJsonBody(req);
      if (typeof body !== 'object' || body === null || Array.isArray(body)) throw new BadRequest('the body must be a JSON object', null);
      const b = body as Record<string, unknown>;
      for (const k of Object.keys(b)) if (!(PATCH_KEYS as readonly string[]).includes(k)) throw new BadRequest(`unknown key ${JSON.stringify(k)} (allowed: ${PATCH_KEYS.join(', ')})`, k);
      if (b.title !== undefined && (typeof b.title !== 'string' || b.title.length > 200)) throw new BadRequest('title must be a string of at most 200 characters', 'title');
      if (b.notes !== undefined && (typeof b.notes !== 'string' || b.notes.length > 20_000)) throw new BadRequest('notes must be a string of at most 20000 characters', 'notes');
      if (b.tags !== undefined && (b.addTags !== undefined || b.removeTags !== undefined)) throw new BadRequest('give tags (the whole list) or addTags/removeTags, not both', 'tags');
      let addTags = b.addTags === undefined ? [] : stringList(b.addTags, 'addTags');
      let removeTags = b.removeTags === undefined ? [] : stringList(b.removeTags, 'removeTags');
      if (b.tags !== undefined) {
        const want = stringList(b.tags, 'tags');
        const have = store.summary(id).tags;
        addTags = want;
        removeTags = have;
      }
      return json({
        session: store.update(id, {
          ...(b.title !== undefined ? { title: b.title as string } : {}),
          ...(b.notes !== undefined ? { notes: b.notes as string } : {}),
          // Removal runs before addition in the store, so "the whole list" is remove-all then add.
          addTags,
          removeTags,
        }),
      });
    }),

    'DELETE /api/sessions/:id': guard(async (_req, _url, p) => {
      const id = parseId(p.id);
      if (d.recordingId() === id) return json({ error: `session ${id} is being recorded; it can be deleted once it has ended` }, 409);
      store.delete(id);
      return json({ deleted: id });
    }),

    'GET /api/sessions/:id/report': guard(async (_req, _url, p) => {
      const id = parseId(p.id);
      const s = store.get(id);
      const samples = store.samples(id, { decimate: { method: 'minmax', points: 1200, channel: 'thrust' } });
      return { status: 200, text: renderSessionReport(s, samples), contentType: 'text/html; charset=utf-8', download: `ductbench-session-${id}.html` };
    }),

    'GET /api/sessions/:id/export': guard(async (_req, url, p) => {
      const id = parseId(p.id);
      const format = url.searchParams.get('format') ?? 'csv';
      const what = url.searchParams.get('what') ?? 'samples';
      if (format !== 'csv' && format !== 'json') throw new BadRequest('format must be csv or json', 'format');
      if (what !== 'samples' && what !== 'points') throw new BadRequest('what must be samples or points (csv only)', 'what');
      store.summary(id); // 404 before any work
      if (format === 'json') return { status: 200, text: exportToString((w) => writeJson(store, id, w)), contentType: 'application/json; charset=utf-8', download: `ductbench-session-${id}.json` };
      return { status: 200, text: exportToString((w) => writeCsv(store, id, what, w)), contentType: 'text/csv; charset=utf-8', download: `ductbench-session-${id}-${what}.csv` };
    }),

    'GET /api/compare': guard(async (_req, url) => {
      const ids = parseIds(url.searchParams.get('ids'));
      const vehicle = vehicleFrom(url.searchParams);
      const sessions = ids.map((id) => store.get(id));
      return json({ comparison: compareSessions(sessions, vehicle ? { vehicle } : {}) });
    }),

    'GET /api/compare/report': guard(async (_req, url) => {
      const ids = parseIds(url.searchParams.get('ids'));
      const vehicle = vehicleFrom(url.searchParams);
      const c = compareSessions(ids.map((id) => store.get(id)), vehicle ? { vehicle } : {});
      return { status: 200, text: renderComparisonReport(c), contentType: 'text/html; charset=utf-8', download: `ductbench-compare-${ids.join('-')}.html` };
    }),
  };
}
