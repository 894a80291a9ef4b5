// `ductbench sessions ...`: list, show, export, import, tag, delete and report recorded sessions. Options are
// declared once per subcommand (cli/args.ts). Exit codes: 0 done, 1 failure (no such session, file error),
// 2 bad usage or a file that is not a ductbench export.

import { closeSync, openSync, readFileSync, renameSync, writeSync } from 'node:fs';
import { basename } from 'node:path';
import { renderSessionReport } from '../compare/report.js';
import { ImportError, InvalidInput, SessionNotFound, StoreError } from '../store/errors.js';
import { exportToString, importText, writeCsv, writeJson, type CsvWhat } from '../store/exchange.js';
import { DEFAULT_DATA_DIR, SessionStore } from '../store/store.js';
import type { SessionSummary } from '../store/types.js';
import { helpText, parseArgs, parsePartRef, UsageError, type CommandSpec, type OptionSpec, type Parsed } from './args.js';

export interface CliIo {
  stdout: (s: string) => void;
  stderr: (s: string) => void;
}

const DATA_DIR: OptionSpec = { kind: 'string', value: 'DIR', help: `folder of the session store (default ${DEFAULT_DATA_DIR})` };

const SUB: Record<string, CommandSpec> = {
  list: {
    name: 'sessions list',
    summary: 'list recorded sessions, newest first',
    usage: 'ductbench sessions list [--tag T ...] [--text WORDS] [--rig NAME] [--part ID[@REV]] [--outcome O] [--from DATE] [--to DATE] [--data-dir DIR] [--json]',
    options: {
      tag: { kind: 'string', value: 'T', help: 'only sessions with this tag', repeat: true },
      text: { kind: 'string', value: 'WORDS', help: 'only sessions whose title or notes contain this' },
      rig: { kind: 'string', value: 'NAME', help: 'only sessions on this rig' },
      part: { kind: 'string', value: 'ID[@REV]', help: 'only sessions that ran with this library part (this revision)' },
      outcome: { kind: 'string', value: 'O', help: 'running, completed, tripped, aborted or interrupted', repeat: true },
      from: { kind: 'string', value: 'DATE', help: 'started at or after (ISO date or time)' },
      to: { kind: 'string', value: 'DATE', help: 'started before (ISO date or time)' },
      limit: { kind: 'int', value: 'N', help: 'at most N sessions', min: 1 },
      'data-dir': DATA_DIR,
      json: { kind: 'flag', help: 'print JSON' },
    },
  },
  show: {
    name: 'sessions show',
    summary: 'show one session: context, operating points, events',
    usage: 'ductbench sessions show ID [--data-dir DIR] [--json]',
    options: { 'data-dir': DATA_DIR, json: { kind: 'flag', help: 'print JSON' } },
    positionals: [1, 1],
  },
  export: {
    name: 'sessions export',
    summary: 'write a session as CSV (samples or operating points) or JSON (everything)',
    usage: 'ductbench sessions export ID --format csv|json [--what samples|points] [--out FILE] [--data-dir DIR]',
    options: {
      format: { kind: 'string', value: 'csv|json', help: 'file format' },
      what: { kind: 'string', value: 'samples|points', help: 'for CSV: the samples (default) or the operating points' },
      out: { kind: 'string', value: 'FILE', help: 'write here instead of standard output' },
      'data-dir': DATA_DIR,
    },
    positionals: [1, 1],
  },
  import: {
    name: 'sessions import',
    summary: 'import a ductbench CSV or JSON export as a new session',
    usage: 'ductbench sessions import FILE [--title TEXT] [--data-dir DIR]',
    options: { title: { kind: 'string', value: 'TEXT', help: 'title of the new session' }, 'data-dir': DATA_DIR, json: { kind: 'flag', help: 'print JSON' } },
    positionals: [1, 1],
  },
  tag: {
    name: 'sessions tag',
    summary: 'add or remove tags, set title or notes',
    usage: 'ductbench sessions tag ID [--add T ...] [--remove T ...] [--title TEXT] [--notes TEXT] [--data-dir DIR]',
    options: {
      add: { kind: 'string', value: 'T', help: 'tag to add', repeat: true },
      remove: { kind: 'string', value: 'T', help: 'tag to remove', repeat: true },
      title: { kind: 'string', value: 'TEXT', help: 'new title' },
      notes: { kind: 'string', value: 'TEXT', help: 'new notes' },
      'data-dir': DATA_DIR,
    },
    positionals: [1, 1],
  },
  delete: {
    name: 'sessions delete',
    summary: 'delete a session and all its samples',
    usage: 'ductbench sessions delete ID --yes [--data-dir DIR]',
    options: { yes: { kind: 'flag', help: 'really delete (required)' }, 'data-dir': DATA_DIR },
    positionals: [1, 1],
  },
  report: {
    name: 'sessions report',
    summary: 'write a self-contained HTML report of a session',
    usage: 'ductbench sessions report ID --out FILE.html [--data-dir DIR]',
    options: { out: { kind: 'string', value: 'FILE', help: 'HTML file to write' }, 'data-dir': DATA_DIR },
    positionals: [1, 1],
  },
};

function topHelp(): string {
  const w = Math.max(...Object.keys(SUB).map((k) => k.length)) + 4;
  return ['usage: ductbench sessions <list|show|export|import|tag|delete|report> [options]', '', ...Object.entries(SUB).map(([k, s]) => `  ${k.padEnd(w)}${s.summary}`), ''].join('\n');
}

export function parseId(s: string): number {
  if (!/^\d+$/.test(s)) throw new UsageError(`session id must be a whole number, not ${JSON.stringify(s)}`);
  return Number(s);
}

function parseDate(name: string, s: string): number {
  const t = Date.parse(s);
  if (!Number.isFinite(t)) throw new UsageError(`--${name}: ${JSON.stringify(s)} is not a date (use e.g. 2024-05-01 or 2024-05-01T14:00Z)`);
  return t;
}

function iso(t: number | null): string {
  return t === null ? '—' : new Date(t).toISOString().replace('T', ' ').slice(0, 16);
}

/** Writes a file atomically: a reader never sees half a report (temp file, then rename). */
export function writeFileAtomic(path: string, fill: (write: (s: string) => void) => void): void {
  const tmp = `${path}.tmp-${process.pid}`;
  const fd = openSync(tmp, 'w');
  try {
    fill((s) => void writeSync(fd, s));
  } finally {
    closeSync(fd);
  }
  renameSync(tmp, path);
}

function listTable(rows: SessionSummary[]): string {
  if (rows.length === 0) return 'no sessions\n';
  const head = ['id', 'started (UTC)', 'outcome', 'samples', 'points', 'title', 'tags'];
  const body = rows.map((r) => [String(r.id), iso(r.started_at), r.outcome, String(r.sample_count), String(r.point_count), r.title || '—', r.tags.join(', ')]);
  const w = head.map((h, i) => Math.max(h.length, ...body.map((b) => b[i].length)));
  return [head, ...body].map((r) => r.map((c, i) => (i === 5 || i === 6 ? c.padEnd(w[i]) : c.padEnd(w[i]))).join('  ').trimEnd()).join('\n') + '\n';
}

async function run(sub: string, p: Parsed, io: CliIo): Promise<number> {
  const o = p.opts as Record<string, string | number | boolean | (string | number)[] | undefined>;
  const dataDir = (o['data-dir'] as string | undefined) ?? DEFAULT_DATA_DIR;
  // Check usage before touching the store, so a typo never creates a data folder.
  if (sub === 'export') {
    if (o.format !== 'csv' && o.format !== 'json') throw new UsageError('--format must be csv or json');
    if (o.what !== undefined && o.what !== 'samples' && o.what !== 'points') throw new UsageError('--what must be samples or points');
    if (o.what !== undefined && o.format === 'json') throw new UsageError('--what goes with --format csv (JSON holds everything)');
  }
  if (sub === 'delete' && !o.yes) throw new UsageError('deleting needs --yes');
  if (sub === 'report' && o.out === undefined) throw new UsageError('--out FILE.html is required');
  if (sub === 'tag' && o.add === undefined && o.remove === undefined && o.title === undefined && o.notes === undefined) throw new UsageError('nothing to change: give --add, --remove, --title or --notes');
  const id = p.positionals[0] !== undefined && sub !== 'import' ? parseId(p.positionals[0]) : -1;
  const filter =
    sub === 'list'
      ? {
          ...(o.tag !== undefined ? { tag: (o.tag as string[]).map(String) } : {}),
          ...(o.text !== undefined ? { text: String(o.text) } : {}),
          ...(o.rig !== undefined ? { rig: String(o.rig) } : {}),
          ...(o.part !== undefined ? (({ id, revision }) => ({ part: id, ...(revision !== undefined ? { partRevision: revision } : {}) }))(parsePartRef(String(o.part), '--part')) : {}),
          ...(o.outcome !== undefined ? { outcome: (o.outcome as string[]).map(String) as never } : {}),
          ...(o.from !== undefined ? { from: parseDate('from', String(o.from)) } : {}),
          ...(o.to !== undefined ? { to: parseDate('to', String(o.to)) } : {}),
          ...(o.limit !== undefined ? { limit: Number(o.limit) } : {}),
        }
      : {};
  let text: string | null = null;
  if (sub === 'import') {
    try {
      text = readFileSync(p.positionals[0], 'utf8');
    } catch (err) {
      io.stderr(`ductbench sessions import: cannot read ${p.positionals[0]}: ${(err as NodeJS.ErrnoException).code ?? (err as Error).message}\n`);
      return 1;
    }
  }

  // Commands that only read open the store read-only: they work on a full disk and write nothing.
  const store = sub === 'list' || sub === 'show' || sub === 'export' || sub === 'report' ? SessionStore.openForReading(dataDir) : SessionStore.open(dataDir);
  try {
    switch (sub) {
      case 'list': {
        const rows = store.list(filter);
        io.stdout(o.json ? JSON.stringify(rows, null, 2) + '\n' : listTable(rows));
        return 0;
      }
      case 'show': {
        const s = store.get(id);
        if (o.json) {
          io.stdout(JSON.stringify(s, null, 2) + '\n');
          return 0;
        }
        const lines = [
          `session ${s.id}: ${s.title || '(untitled)'}`,
          `  outcome   ${s.outcome}`,
          `  started   ${iso(s.started_at)} UTC, ended ${iso(s.ended_at)} UTC`,
          `  rig       ${s.rig_name ?? '—'}${s.rig?.duct ? ` (ducted, exit ${(s.rig.duct.exit_diameter_m * 1000).toFixed(1)} mm, ${(s.rig.duct.mass_kg * 1000).toFixed(0)} g)` : s.rig ? ' (open)' : ''}`,
          ...(s.mount.length ? [`  parts     ${s.mount.map((m) => `${m.slot} ${m.name} (#${m.part_id} r${m.revision})`).join(', ')}`] : []),
          `  tags      ${s.tags.join(', ') || '—'}`,
          `  samples   ${s.sample_count}`,
          ...(s.notes ? [`  notes     ${s.notes.replace(/\n/g, '\n            ')}`] : []),
          '',
          `operating points (${s.points.length}):`,
          '     #  throttle  thrust N   power W     g/W',
          ...s.points.map(
            (p) =>
              `  ${String(p.index).padStart(4)}  ${p.throttle.toFixed(3).padStart(8)}  ${(p.channels.thrust?.mean.toFixed(3) ?? '—').padStart(8)}  ${(p.channels.power?.mean.toFixed(1) ?? '—').padStart(8)}  ${(p.grams_per_watt?.toFixed(2) ?? '—').padStart(6)}`,
          ),
          '',
          `events (${s.events.length}):`,
          ...s.events.map((e) => `  ${iso(e.t)}  ${e.level.padEnd(5)} ${e.kind.padEnd(10)} ${e.text}`),
        ];
        io.stdout(lines.join('\n') + '\n');
        return 0;
      }
      case 'export': {
        const what = ((o.what as string | undefined) ?? 'samples') as CsvWhat;
        const fill = (w: (s: string) => void) => (o.format === 'json' ? writeJson(store, id, w) : writeCsv(store, id, what, w));
        store.summary(id); // fail with "no session" before creating an output file
        if (o.out !== undefined) {
          writeFileAtomic(String(o.out), fill);
          io.stderr(`wrote ${o.out}\n`);
        } else fill(io.stdout);
        return 0;
      }
      case 'import': {
        const r = importText(store, text as string, { sourceName: basename(p.positionals[0]), ...(o.title !== undefined ? { title: String(o.title) } : {}) });
        if (o.json) io.stdout(JSON.stringify(r) + '\n');
        else io.stdout(`imported ${p.positionals[0]} as session ${r.id} (${r.samples} samples, ${r.points} operating points)\n`);
        return 0;
      }
      case 'tag': {
        const s = store.update(id, {
          ...(o.add !== undefined ? { addTags: (o.add as string[]).map(String) } : {}),
          ...(o.remove !== undefined ? { removeTags: (o.remove as string[]).map(String) } : {}),
          ...(o.title !== undefined ? { title: String(o.title) } : {}),
          ...(o.notes !== undefined ? { notes: String(o.notes) } : {}),
        });
        io.stdout(`session ${s.id}: tags ${s.tags.join(', ') || '—'}\n`);
        return 0;
      }
      case 'delete': {
        const s = store.summary(id);
        store.delete(id);
        io.stdout(`deleted session ${id} (${s.title || 'untitled'}, ${s.sample_count} samples)\n`);
        return 0;
      }
      case 'report': {
        const s = store.get(id);
        const samples = store.samples(id, { decimate: { method: 'minmax', points: 1200, channel: 'thrust' } });
        writeFileAtomic(String(o.out), (w) => w(renderSessionReport(s, samples)));
        io.stderr(`wrote ${o.out}\n`);
        return 0;
      }
    }
    return 2;
  } finally {
    store.close();
  }
}

/** Entry point for `ductbench sessions`; argv is what follows "sessions". */
export async function sessionsMain(argv: readonly string[], io: CliIo): Promise<number> {
  const [sub, ...rest] = argv;
  if (sub === undefined || sub === '--help' || sub === '-h') {
    io.stdout(topHelp());
    return sub === undefined ? 2 : 0;
  }
  const spec = SUB[sub];
  if (!spec) {
    io.stderr(`ductbench sessions: unknown subcommand ${JSON.stringify(sub)} (list, show, export, import, tag, delete, report)\n`);
    return 2;
  }
  try {
    const p = parseArgs(spec, rest);
    if (p.help) {
      io.stdout(helpText(spec));
      return 0;
    }
    return await run(sub, p, io);
  } catch (err) {
    return reportError(`ductbench ${spec.name}`, err, io);
  }
}

export function reportError(who: string, err: unknown, io: CliIo): number {
  if (err instanceof UsageError || err instanceof ImportError || err instanceof InvalidInput) {
    io.stderr(`${who}: ${err.message}\n`);
    return 2;
  }
  if (err instanceof SessionNotFound || err instanceof StoreError) {
    io.stderr(`${who}: ${err.message}\n`);
    return 1;
  }
  const code = (err as NodeJS.ErrnoException)?.code;
  io.stderr(`${who}: ${code ? `${code}: ` : ''}${err instanceof Error ? err.message : String(err)}\n`);
  return 1;
}

