// Moving sessions in and out of the store as files: CSV (samples or operating points; units in the column
// names, numbers at a stated precision per column) and JSON (a whole session, numbers exact). Exports stream
// through a write callback so a one-hour session never becomes one giant string. Import refuses a damaged
// file with the line and the problem, and never half-imports: the new session is written in one transaction.

import { POINT_CHANNELS, type ChannelStats, type OperatingPoint, type PointChannel } from '../bench/operating-point.js';
import type { Sample } from '../bench/telemetry.js';
import { ImportError } from './errors.js';
import { SAMPLE_COLUMNS } from './schema.js';
import type { SessionStore } from './store.js';
import { SESSION_OUTCOMES, type SessionContext, type SessionOutcome, type SessionRecord, type StoredEvent } from './types.js';

export const CSV_MARKER = '# ductbench session export v1';
const CONTEXT_MARKER = '# context ';
export const JSON_FORMAT = 'ductbench-session';
export const JSON_VERSION = 1;

export type CsvWhat = 'samples' | 'points';
export type Write = (chunk: string) => void;

interface Column {
  name: string;
  decimals: number;
}

/** Sample columns: name with unit, decimals printed. Row order t, dt, then SAMPLE_COLUMNS. */
export const SAMPLE_CSV_COLUMNS: readonly Column[] = [
  { name: 't_ms', decimals: 3 },
  { name: 'dt_s', decimals: 6 },
  { name: 'thrust_N', decimals: 5 },
  { name: 'voltage_V', decimals: 4 },
  { name: 'current_A', decimals: 4 },
  { name: 'power_W', decimals: 4 },
  { name: 'rpm', decimals: 1 },
  { name: 'temp_C', decimals: 2 },
  { name: 'torque_Nm', decimals: 6 },
  { name: 'out', decimals: 4 },
];

const POINT_UNIT: Record<PointChannel, string> = { thrust: '_N', voltage: '_V', current: '_A', power: '_W', rpm: '', temp: '_C', torque: '_Nm' };
const POINT_DECIMALS: Record<PointChannel, number> = { thrust: 5, voltage: 4, current: 4, power: 4, rpm: 1, temp: 2, torque: 6 };
const STAT_KEYS = ['mean', 'std', 'min', 'max', 'n'] as const;

function statColumn(c: PointChannel, k: (typeof STAT_KEYS)[number]): string {
  return k === 'n' ? `${c}_n` : k === 'mean' ? `${c}${POINT_UNIT[c]}` : `${c}_${k}${POINT_UNIT[c]}`;
}

export const POINT_CSV_COLUMNS: readonly Column[] = [
  { name: 'index', decimals: 0 },
  { name: 'throttle', decimals: 4 },
  { name: 't_start_ms', decimals: 3 },
  { name: 't_end_ms', decimals: 3 },
  { name: 'settled', decimals: 0 },
  ...POINT_CHANNELS.flatMap((c) => STAT_KEYS.map((k) => ({ name: statColumn(c, k), decimals: k === 'n' ? 0 : POINT_DECIMALS[c] + 1 }))),
  { name: 'grams_per_watt', decimals: 4 },
  { name: 'figure_of_merit', decimals: 4 },
  { name: 'predicted_thrust_N', decimals: 5 },
  { name: 'predicted_power_W', decimals: 4 },
  { name: 'predicted_grams_per_watt', decimals: 4 },
  { name: 'deviation_pct', decimals: 3 },
];

/** Fixed decimals with trailing zeros trimmed; empty for absent. */
export function formatNumber(x: number | null | undefined, decimals: number): string {
  if (x === null || x === undefined || !Number.isFinite(x)) return '';
  let s = x.toFixed(decimals);
  if (decimals > 0) s = s.replace(/\.?0+$/, '');
  return s === '-0' ? '0' : s;
}

function headerMeta(s: SessionRecord, what: CsvWhat | 'session'): string {
  return JSON.stringify({ id: s.id, what, title: s.title, tags: s.tags, outcome: s.outcome, started_at: s.started_at, ended_at: s.ended_at });
}

function contextLine(s: SessionRecord): string {
  return CONTEXT_MARKER + JSON.stringify({ notes: s.notes, rig: s.rig, calibration: s.calibration, atmosphere: s.atmosphere, firmware: s.firmware, sequence: s.sequence });
}

/** CSV of a session's samples or points: marker line with id/title/tags, a context line, the header, rows. */
export function writeCsv(store: SessionStore, id: number, what: CsvWhat, write: Write): void {
  const s = store.get(id);
  write(`${CSV_MARKER} ${headerMeta(s, what)}\n${contextLine(s)}\n`);
  if (what === 'samples') {
    const cols = SAMPLE_CSV_COLUMNS;
    write(cols.map((c) => c.name).join(',') + '\n');
    let buf: string[] = [];
    for (const row of store.iterateSamples(id)) {
      let line = formatNumber(row[0], cols[0].decimals);
      for (let i = 1; i < cols.length; i++) line += ',' + formatNumber(row[i], cols[i].decimals);
      buf.push(line);
      if (buf.length >= 4096) {
        write(buf.join('\n') + '\n');
        buf = [];
      }
    }
    if (buf.length) write(buf.join('\n') + '\n');
  } else {
    write(POINT_CSV_COLUMNS.map((c) => c.name).join(',') + '\n');
    for (const p of s.points) write(pointRow(p).join(',') + '\n');
  }
}

function pointRow(p: OperatingPoint): string[] {
  const v: (number | null)[] = [p.index, p.throttle, p.t_start, p.t_end, p.settled ? 1 : 0];
  for (const c of POINT_CHANNELS) {
    const st = p.channels[c];
    for (const k of STAT_KEYS) v.push(st ? st[k] : null);
  }
  v.push(p.grams_per_watt, p.figure_of_merit, p.predicted?.thrust_N ?? null, p.predicted?.power_W ?? null, p.predicted?.grams_per_watt ?? null, p.deviation_pct);
  return v.map((x, i) => formatNumber(x, POINT_CSV_COLUMNS[i].decimals));
}

/** The whole session as JSON: context, points, events, and samples as rows of numbers (exact). */
export function writeJson(store: SessionStore, id: number, write: Write): void {
  const s = store.get(id);
  const session = {
    id: s.id,
    title: s.title,
    notes: s.notes,
    tags: s.tags,
    outcome: s.outcome,
    started_at: s.started_at,
    ended_at: s.ended_at,
    rig: s.rig,
    calibration: s.calibration,
    atmosphere: s.atmosphere,
    firmware: s.firmware,
    sequence: s.sequence,
    // The library parts it ran with, for people and later tools; their ids belong to this data folder, so an
    // import keeps the rig snapshot above and links no parts.
    mount: s.mount,
  };
  write(`{"format":${JSON.stringify(JSON_FORMAT)},"version":${JSON_VERSION},"session":${JSON.stringify(session)},\n`);
  write(`"points":${JSON.stringify(s.points)},\n"events":${JSON.stringify(s.events)},\n`);
  write(`"samples":{"columns":${JSON.stringify(SAMPLE_CSV_COLUMNS.map((c) => c.name))},"rows":[`);
  let first = true;
  let buf: string[] = [];
  for (const row of store.iterateSamples(id)) {
    buf.push(JSON.stringify(row));
    if (buf.length >= 4096) {
      write((first ? '\n' : ',\n') + buf.join(',\n'));
      first = false;
      buf = [];
    }
  }
  if (buf.length) write((first ? '\n' : ',\n') + buf.join(',\n'));
  write('\n]}}\n');
}

/** Collects a streamed export into one string (tests, small sessions). */
export function exportToString(fn: (w: Write) => void): string {
  const parts: string[] = [];
  fn((c) => void parts.push(c));
  return parts.join('');
}

// ---------------------------------------------------------------------------------------------------- import

export interface ImportOptions {
  /** Title for the new session (default: the file's, else "imported"). */
  title?: string;
  /** Shown in the import event: where the data came from. */
  sourceName?: string;
  now?: number;
}

export interface ImportResult {
  id: number;
  what: CsvWhat | 'session';
  samples: number;
  points: number;
}

/** Imports a ductbench CSV (samples or points) or JSON export as a new session. Throws ImportError. */
export function importText(store: SessionStore, text: string, opts: ImportOptions = {}): ImportResult {
  const start = text.replace(/^\uFEFF/, '').trimStart();
  if (start.startsWith('{')) return importJson(store, text, opts);
  return importCsv(store, text, opts);
}

interface ParsedFile {
  what: CsvWhat | 'session';
  ctx: SessionContext;
  outcome: SessionOutcome;
  ended_at: number | null;
  originalId: number | null;
  samples: Sample[];
  points: OperatingPoint[];
  events: StoredEvent[];
}

function commit(store: SessionStore, f: ParsedFile, opts: ImportOptions, kind: string): ImportResult {
  const now = opts.now ?? Date.now();
  if (opts.title !== undefined) f.ctx.title = opts.title;
  else if (!f.ctx.title) f.ctx.title = 'imported';
  // A file exported mid-recording says 'running'; as an import it is a finished, cut-short record.
  const outcome: SessionOutcome = f.outcome === 'running' ? 'interrupted' : f.outcome;
  const from = opts.sourceName ? ` from ${opts.sourceName}` : '';
  const note: StoredEvent = {
    t: now,
    level: 'info',
    kind: 'import',
    text: `imported${from} (${kind}${f.originalId !== null ? `, original session ${f.originalId}` : ''})`,
    data: { original_id: f.originalId, what: f.what },
  };
  const id = store.db.transaction(() => {
    const id = store.createSession(f.ctx, outcome);
    const ended = f.ended_at ?? lastTime(f) ?? f.ctx.started_at ?? null;
    store.setOutcome(id, outcome, ended);
    for (let i = 0; i < f.samples.length; i += 10_000) store.writeBatch(id, f.samples.slice(i, i + 10_000));
    store.writeBatch(id, [], f.points, [...f.events, note]);
    return id;
  })();
  return { id, what: f.what, samples: f.samples.length, points: f.points.length };
}

function lastTime(f: ParsedFile): number | null {
  const ts = [f.samples.at(-1)?.t, f.points.at(-1)?.t_end].filter((x): x is number => typeof x === 'number');
  return ts.length ? Math.max(...ts) : null;
}

function* lines(text: string): Generator<[number, string]> {
  let pos = text.charCodeAt(0) === 0xfeff ? 1 : 0;
  let n = 0;
  while (pos <= text.length) {
    let end = text.indexOf('\n', pos);
    if (end < 0) end = text.length;
    n++;
    let line = text.slice(pos, end);
    if (line.endsWith('\r')) line = line.slice(0, -1);
    yield [n, line];
    pos = end + 1;
  }
}

function parseMeta(line: string, n: number, prefix: string): Record<string, unknown> {
  const rest = line.slice(prefix.length).trim();
  if (rest === '') return {};
  let v: unknown;
  try {
    v = JSON.parse(rest);
  } catch {
    throw new ImportError(n, `the text after "${prefix.trim()}" is not valid JSON`);
  }
  if (typeof v !== 'object' || v === null || Array.isArray(v)) throw new ImportError(n, `the text after "${prefix.trim()}" must be a JSON object`);
  return v as Record<string, unknown>;
}

function metaToContext(meta: Record<string, unknown>, ctx: Record<string, unknown>, n: number): Pick<ParsedFile, 'ctx' | 'outcome' | 'ended_at' | 'originalId'> {
  const str = (v: unknown, name: string): string | undefined => {
    if (v === undefined || v === null) return undefined;
    if (typeof v !== 'string') throw new ImportError(n, `${name} must be a string`);
    return v;
  };
  const num = (v: unknown, name: string): number | null => {
    if (v === undefined || v === null) return null;
    if (typeof v !== 'number' || !Number.isFinite(v)) throw new ImportError(n, `${name} must be a number`);
    return v;
  };
  const tags = meta.tags ?? [];
  if (!Array.isArray(tags) || !tags.every((t) => typeof t === 'string')) throw new ImportError(n, 'tags must be a list of strings');
  const outcome = meta.outcome ?? 'completed';
  if (typeof outcome !== 'string' || !SESSION_OUTCOMES.includes(outcome as SessionOutcome)) throw new ImportError(n, `unknown outcome ${JSON.stringify(outcome)}`);
  const started = num(meta.started_at, 'started_at');
  const rig = ctx.rig ?? null;
  if (rig !== null && (typeof rig !== 'object' || typeof (rig as { name?: unknown }).name !== 'string')) throw new ImportError(n, 'rig must be an object with a name');
  return {
    ctx: {
      title: str(meta.title, 'title') ?? '',
      notes: str(ctx.notes ?? meta.notes, 'notes') ?? '',
      tags: tags as string[],
      rig: rig as SessionContext['rig'],
      calibration: (ctx.calibration ?? null) as SessionContext['calibration'],
      atmosphere: (ctx.atmosphere ?? null) as SessionContext['atmosphere'],
      firmware: (ctx.firmware ?? null) as SessionContext['firmware'],
      sequence: ctx.sequence ?? null,
      ...(started !== null ? { started_at: started } : {}),
    },
    outcome: outcome as SessionOutcome,
    ended_at: num(meta.ended_at, 'ended_at'),
    originalId: num(meta.id, 'id'),
  };
}

function importCsv(store: SessionStore, text: string, opts: ImportOptions): ImportResult {
  let meta: Record<string, unknown> = {};
  let ctx: Record<string, unknown> = {};
  let header: string[] | null = null;
  let headerLine = 0;
  let what: CsvWhat | null = null;
  let index: number[] = [];
  const samples: Sample[] = [];
  const points: OperatingPoint[] = [];
  for (const [n, line] of lines(text)) {
    if (header === null) {
      if (n === 1 && line.startsWith('#') && !line.startsWith(CSV_MARKER)) {
        throw new ImportError(1, `not a ductbench export: expected "${CSV_MARKER}" or a header row`);
      }
      if (line.startsWith(CSV_MARKER)) {
        if (n !== 1) throw new ImportError(n, 'the export marker must be the first line');
        meta = parseMeta(line, n, CSV_MARKER);
        continue;
      }
      if (line.startsWith(CONTEXT_MARKER)) {
        ctx = parseMeta(line, n, CONTEXT_MARKER);
        continue;
      }
      if (line.startsWith('#') || line.trim() === '') continue;
      header = line.split(',').map((h) => h.trim());
      headerLine = n;
      ({ what, index } = matchHeader(header, n, meta.what));
      continue;
    }
    if (line.trim() === '') continue;
    if (line.startsWith('#')) throw new ImportError(n, 'comment lines are only allowed before the header');
    const fields = line.split(',');
    if (fields.length !== header.length) throw new ImportError(n, `expected ${header.length} fields like the header on line ${headerLine}, found ${fields.length}`);
    const values = new Array<number | null>(fields.length);
    for (let i = 0; i < fields.length; i++) {
      const f = fields[i].trim();
      if (f === '') {
        values[i] = null;
        continue;
      }
      const x = Number(f);
      if (!Number.isFinite(x)) throw new ImportError(n, `field ${i + 1} (${header[i]}) ${JSON.stringify(f)} is not a number`);
      values[i] = x;
    }
    if (what === 'samples') samples.push(sampleFromRow(values, index, n));
    else points.push(pointFromRow(values, index, n, header));
  }
  if (header === null || what === null) throw new ImportError(null, 'no header row found: the file holds no ductbench samples or points');
  if (what === 'samples') {
    for (let i = 1; i < samples.length; i++) {
      if (samples[i].t < samples[i - 1].t) throw new ImportError(headerLine + 1 + i, `t_ms goes backwards (${samples[i].t} after ${samples[i - 1].t})`);
    }
  }
  const base = metaToContext(meta, ctx, 1);
  if (base.ctx.started_at === undefined) {
    const t0 = samples[0]?.t ?? points[0]?.t_start;
    if (t0 !== undefined) base.ctx.started_at = t0;
  }
  return commit(store, { what, ...base, samples, points, events: [] }, opts, `${what} CSV`);
}

/** Maps header names to the known column order; unknown or repeated columns are errors, absent ones are null. */
function matchHeader(header: string[], n: number, declared: unknown): { what: CsvWhat; index: number[] } {
  const isSamples = header.includes('t_ms');
  const isPoints = header.includes('throttle') && header.includes('index');
  let what: CsvWhat;
  if (declared === 'samples' || declared === 'points') what = declared;
  else if (isSamples && !isPoints) what = 'samples';
  else if (isPoints && !isSamples) what = 'points';
  else throw new ImportError(n > 0 ? n : null, 'header names neither sample columns (t_ms, ...) nor point columns (index, throttle, ...)');
  const known = what === 'samples' ? SAMPLE_CSV_COLUMNS : POINT_CSV_COLUMNS;
  const required = what === 'samples' ? ['t_ms'] : ['index', 'throttle', 't_start_ms', 't_end_ms'];
  const index = new Array<number>(known.length).fill(-1);
  header.forEach((h, i) => {
    const k = known.findIndex((c) => c.name === h);
    if (k < 0) throw new ImportError(n > 0 ? n : null, `unknown ${what} column ${JSON.stringify(h)} (column ${i + 1})`);
    if (index[k] >= 0) throw new ImportError(n > 0 ? n : null, `column ${JSON.stringify(h)} appears twice`);
    index[k] = i;
  });
  for (const r of required) if (index[known.findIndex((c) => c.name === r)] < 0) throw new ImportError(n > 0 ? n : null, `the ${what} header lacks the ${r} column`);
  return { what, index };
}

function sampleFromRow(v: (number | null)[], index: number[], n: number): Sample {
  const get = (k: number) => (index[k] >= 0 ? v[index[k]] : null);
  const t = get(0);
  if (t === null) throw new ImportError(n, 't_ms is empty');
  const s: Record<string, number | null> = { t, dt: get(1) };
  SAMPLE_COLUMNS.forEach((c, i) => (s[c] = get(i + 2)));
  return s as unknown as Sample;
}

function pointFromRow(v: (number | null)[], index: number[], n: number, header: string[]): OperatingPoint {
  const cols = POINT_CSV_COLUMNS;
  const byName = (name: string) => {
    const k = cols.findIndex((c) => c.name === name);
    return index[k] >= 0 ? v[index[k]] : null;
  };
  const need = (name: string) => {
    const x = byName(name);
    if (x === null) throw new ImportError(n, `${name} is empty`);
    return x;
  };
  const throttle = need('throttle');
  if (throttle < 0 || throttle > 1) throw new ImportError(n, `throttle ${throttle} outside 0..1`);
  const channels: OperatingPoint['channels'] = {};
  for (const c of POINT_CHANNELS) {
    const mean = byName(statColumn(c, 'mean'));
    if (mean === null) continue;
    const st: ChannelStats = {
      mean,
      std: byName(statColumn(c, 'std')) ?? 0,
      n: byName(statColumn(c, 'n')) ?? 1,
      min: byName(statColumn(c, 'min')) ?? mean,
      max: byName(statColumn(c, 'max')) ?? mean,
    };
    if (st.std < 0) throw new ImportError(n, `${statColumn(c, 'std')} is negative`);
    channels[c] = st;
  }
  void header;
  const pt = byName('predicted_thrust_N');
  const pp = byName('predicted_power_W');
  const pg = byName('predicted_grams_per_watt');
  return {
    index: need('index'),
    throttle,
    t_start: need('t_start_ms'),
    t_end: need('t_end_ms'),
    settled: byName('settled') === 1,
    channels,
    grams_per_watt: byName('grams_per_watt'),
    figure_of_merit: byName('figure_of_merit'),
    predicted: pt !== null && pp !== null && pg !== null ? { thrust_N: pt, power_W: pp, grams_per_watt: pg } : null,
    deviation_pct: byName('deviation_pct'),
  };
}

function lineOf(text: string, pos: number): number {
  let n = 1;
  for (let i = 0; i < pos && i < text.length; i++) if (text.charCodeAt(i) === 10) n++;
  return n;
}

/**
 * The line of a JSON.parse error. V8 words its messages three ways: "... at position N", "Unexpected token 'x',
 * ..."context"... is not valid JSON" (ten characters either side), and "Unexpected end of JSON input".
 */
function jsonErrorLine(text: string, msg: string): number | null {
  const pos = /at position (\d+)/.exec(msg);
  if (pos) return lineOf(text, Number(pos[1]));
  const tok = /^Unexpected token '([\s\S])', (\.\.\.)?"([\s\S]*?)"(\.\.\.)? is not valid JSON$/.exec(msg);
  if (tok) {
    const at = text.indexOf(tok[3]);
    if (at >= 0) return lineOf(text, at + (tok[2] ? 10 : tok[3].indexOf(tok[1])));
  }
  if (/end of JSON input/.test(msg)) return lineOf(text, text.length);
  return null;
}

function importJson(store: SessionStore, text: string, opts: ImportOptions): ImportResult {
  let doc: unknown;
  try {
    doc = JSON.parse(text);
  } catch (err) {
    const msg = (err as Error).message;
    throw new ImportError(jsonErrorLine(text, msg), `not valid JSON (${msg.length > 120 ? msg.slice(0, 120) + '...' : msg})`);
  }
  const d = doc as Record<string, unknown>;
  if (typeof d !== 'object' || d === null || d.format !== JSON_FORMAT) throw new ImportError(null, `not a ductbench session export (format must be "${JSON_FORMAT}")`);
  if (d.version !== JSON_VERSION) throw new ImportError(null, `export version ${JSON.stringify(d.version)} is not supported (this ductbench reads ${JSON_VERSION})`);
  const session = (d.session ?? {}) as Record<string, unknown>;
  const base = metaToContext(session, session, 1);
  const points = d.points ?? [];
  if (!Array.isArray(points)) throw new ImportError(null, 'points must be a list');
  points.forEach((p, i) => {
    const q = p as Partial<OperatingPoint>;
    if (typeof q !== 'object' || q === null || typeof q.throttle !== 'number' || typeof q.index !== 'number' || typeof q.t_start !== 'number' || typeof q.channels !== 'object') {
      throw new ImportError(null, `points[${i}] is not an operating point (index, throttle, t_start, channels)`);
    }
  });
  const events = d.events ?? [];
  if (!Array.isArray(events)) throw new ImportError(null, 'events must be a list');
  events.forEach((e, i) => {
    const q = e as Partial<StoredEvent>;
    if (typeof q?.t !== 'number' || !['info', 'warn', 'error'].includes(q.level as string) || typeof q.kind !== 'string' || typeof q.text !== 'string') {
      throw new ImportError(null, `events[${i}] is not an event (t, level info|warn|error, kind, text)`);
    }
  });
  const s = (d.samples ?? { columns: SAMPLE_CSV_COLUMNS.map((c) => c.name), rows: [] }) as { columns?: unknown; rows?: unknown };
  if (!Array.isArray(s.columns) || !Array.isArray(s.rows)) throw new ImportError(null, 'samples must have columns and rows');
  const { index } = matchHeader(s.columns as string[], 0, 'samples');
  const samples = (s.rows as unknown[]).map((r, i) => {
    if (!Array.isArray(r) || r.length !== (s.columns as unknown[]).length || !r.every((x) => x === null || (typeof x === 'number' && Number.isFinite(x)))) {
      throw new ImportError(null, `samples.rows[${i}] must be ${(s.columns as unknown[]).length} numbers or nulls`);
    }
    return sampleFromRow(r as (number | null)[], index, 0);
  });
  return commit(store, { what: 'session', ...base, samples, points: points as OperatingPoint[], events: events as StoredEvent[] }, opts, 'session JSON');
}
