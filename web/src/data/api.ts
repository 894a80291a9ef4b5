// The sessions HTTP API as the dashboard calls it (server/http/sessions-api.ts): fetch with the token as a
// bearer header (never in a URL the browser keeps), JSON in and out, errors as values with the daemon's
// message and the field it named. Downloads are fetched the same way and handed to the page as blobs.

import type { Comparison } from '../../../server/compare/compare.js';
import type { SampleBatch } from '../../../server/api/messages.js';
import type { SessionRecord, SessionSummary } from '../../../server/store/types.js';

export type ApiResult<T> = { ok: true; value: T } | { ok: false; status: number; error: string; field: string | null };

export interface SessionQuery {
  text?: string;
  tag?: string;
  rig?: string;
  outcome?: string;
  /** YYYY-MM-DD */
  from?: string;
  to?: string;
}

export interface VehicleQuery {
  mass: number;
  motors: number;
  battery_wh: number;
}

export interface SessionEdit {
  title?: string;
  notes?: string;
  tags?: string[];
}

export type FetchLike = (url: string, init?: { method?: string; headers?: Record<string, string>; body?: string }) => Promise<{
  ok: boolean;
  status: number;
  headers: { get(name: string): string | null };
  text(): Promise<string>;
  blob(): Promise<Blob>;
}>;

export class SessionsApi {
  constructor(
    private readonly _base: string,
    private readonly _token: string,
    private readonly _fetch: FetchLike,
  ) {}

  list(q: SessionQuery = {}): Promise<ApiResult<SessionSummary[]>> {
    const p = new URLSearchParams();
    for (const [k, v] of Object.entries(q)) if (typeof v === 'string' && v.trim() !== '') p.set(k, v.trim());
    return this._json<{ sessions: SessionSummary[] }>(`/api/sessions${p.size ? `?${p}` : ''}`).then((r) => (r.ok ? { ok: true, value: r.value.sessions } : r));
  }

  get(id: number): Promise<ApiResult<SessionRecord>> {
    return this._json<{ session: SessionRecord }>(`/api/sessions/${id}`).then((r) => (r.ok ? { ok: true, value: r.value.session } : r));
  }

  samples(id: number, points: number): Promise<ApiResult<SampleBatch>> {
    return this._json<{ samples: SampleBatch }>(`/api/sessions/${id}/samples?points=${Math.round(points)}`).then((r) => (r.ok ? { ok: true, value: r.value.samples } : r));
  }

  edit(id: number, patch: SessionEdit): Promise<ApiResult<SessionSummary>> {
    return this._json<{ session: SessionSummary }>(`/api/sessions/${id}`, { method: 'PATCH', body: JSON.stringify(patch) }).then((r) => (r.ok ? { ok: true, value: r.value.session } : r));
  }

  remove(id: number): Promise<ApiResult<number>> {
    return this._json<{ deleted: number }>(`/api/sessions/${id}`, { method: 'DELETE' }).then((r) => (r.ok ? { ok: true, value: r.value.deleted } : r));
  }

  compare(ids: number[], vehicle: VehicleQuery | null): Promise<ApiResult<Comparison>> {
    return this._json<{ comparison: Comparison }>(`/api/compare?${compareQuery(ids, vehicle)}`).then((r) => (r.ok ? { ok: true, value: r.value.comparison } : r));
  }

  /** A report or export as a file: the blob and the name the daemon gave it. */
  async download(kind: 'session-report' | 'compare-report' | 'csv' | 'points-csv' | 'json', ids: number[], vehicle: VehicleQuery | null = null): Promise<ApiResult<{ blob: Blob; name: string }>> {
    const id = ids[0];
    const path =
      kind === 'session-report'
        ? `/api/sessions/${id}/report`
        : kind === 'compare-report'
          ? `/api/compare/report?${compareQuery(ids, vehicle)}`
          : kind === 'json'
            ? `/api/sessions/${id}/export?format=json`
            : `/api/sessions/${id}/export?format=csv&what=${kind === 'csv' ? 'samples' : 'points'}`;
    try {
      const res = await this._fetch(this._base + path, { headers: this._headers() });
      if (!res.ok) return await failure(res);
      const cd = res.headers.get('content-disposition') ?? '';
      const name = /filename="([^"]+)"/.exec(cd)?.[1] ?? 'ductbench-download';
      return { ok: true, value: { blob: await res.blob(), name } };
    } catch (err) {
      return { ok: false, status: 0, error: `the daemon did not answer: ${err instanceof Error ? err.message : String(err)}`, field: null };
    }
  }

  private _headers(json = false): Record<string, string> {
    return { authorization: `Bearer ${this._token}`, ...(json ? { 'content-type': 'application/json' } : {}) };
  }

  private async _json<T>(path: string, init: { method?: string; body?: string } = {}): Promise<ApiResult<T>> {
    try {
      const res = await this._fetch(this._base + path, { ...init, headers: this._headers(init.body !== undefined) });
      if (!res.ok) return await failure(res);
      return { ok: true, value: JSON.parse(await res.text()) as T };
    } catch (err) {
      return { ok: false, status: 0, error: `the daemon did not answer: ${err instanceof Error ? err.message : String(err)}`, field: null };
    }
  }
}

function compareQuery(ids: number[], vehicle: VehicleQuery | null): string {
  const p = new URLSearchParams({ ids: ids.join(',') });
  if (vehicle) {
    p.set('mass', String(vehicle.mass));
    p.set('motors', String(vehicle.motors));
    p.set('battery_wh', String(vehicle.battery_wh));
  }
  return p.toString();
}

async function failure(res: { status: number; text(): Promise<string> }): Promise<{ ok: false; status: number; error: string; field: string | null }> {
  let error = `HTTP ${res.status}`;
  let field: string | null = null;
  try {
    const b = JSON.parse(await res.text()) as { error?: unknown; field?: unknown };
    if (typeof b.error === 'string') error = b.error;
    if (typeof b.field === 'string') field = b.field;
  } catch {
    // not JSON: keep the status
  }
  return { ok: false, status: res.status, error, field };
}

/** Hands a blob to the browser as a download (an object URL, released once clicked). */
export function saveBlob(blob: Blob, name: string): void {
  const url = URL.createObjectURL(blob);
  const a = document.createElement('a');
  a.href = url;
  a.download = name;
  a.rel = 'noopener';
  document.body.append(a);
  a.click();
  a.remove();
  setTimeout(() => URL.revokeObjectURL(url), 10_000);
}
