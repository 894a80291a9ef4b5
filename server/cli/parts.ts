// `ductbench parts ...`: the parts library in the data folder. list, show, add, edit (adds the next revision),
// retire, import (a rig file's parts) and export (a rig file from parts, or from what a session ran with).
// Exit codes: 0 done, 1 failure (no such part, a refusal), 2 bad usage or a part document that breaks a rule.

import { readFileSync } from 'node:fs';
import { RigError, parseRig } from '../model/rig.js';
import type { RigSpec } from '../model/rig-types.js';
import { mountOf, PartsLibrary, partLabel, type ResolvedMount } from '../parts/library.js';
import { partSummary } from '../parts/mount.js';
import { PART_KINDS, type PartKind, type PartRevision } from '../parts/types.js';
import { parseKind } from '../parts/validate.js';
import { DEFAULT_DATA_DIR, SessionStore } from '../store/store.js';
import { helpText, parseArgs, parsePartRef, UsageError, type CommandSpec, type OptionSpec, type Parsed } from './args.js';
import { reportError, writeFileAtomic, type CliIo } from './sessions.js';

const DATA_DIR: OptionSpec = { kind: 'string', value: 'DIR', help: `folder of the session store and parts library (default ${DEFAULT_DATA_DIR})` };
const JSON_OUT: OptionSpec = { kind: 'flag', help: 'print JSON' };
const DOC_FILE: OptionSpec = { kind: 'string', value: 'FILE', help: "a JSON file with the part's fields (as in its section of a rig file), optional notes and limits" };
const DOC_TEXT: OptionSpec = { kind: 'string', value: 'JSON', help: 'the same, given inline' };
const slotOption = (slot: PartKind): OptionSpec => ({
  kind: 'string',
  value: slot === 'duct' ? 'ID[@REV]|none' : 'ID[@REV]',
  help: `the ${slot} (its latest revision unless @REV)${slot === 'duct' ? '; none for an open propeller' : ''}`,
});

const SUB: Record<string, CommandSpec> = {
  list: {
    name: 'parts list',
    summary: 'list the parts (latest revisions), by kind and name',
    usage: 'ductbench parts list [--kind K] [--retired] [--data-dir DIR] [--json]',
    options: { kind: { kind: 'string', value: 'K', help: `only this kind (${PART_KINDS.join(', ')})` }, retired: { kind: 'flag', help: 'include retired parts' }, 'data-dir': DATA_DIR, json: JSON_OUT },
  },
  show: {
    name: 'parts show',
    summary: 'show a part: its fields, notes, limits, revisions and the sessions that used it',
    usage: 'ductbench parts show ID[@REV] [--data-dir DIR] [--json]',
    options: { 'data-dir': DATA_DIR, json: JSON_OUT },
    positionals: [1, 1],
  },
  add: {
    name: 'parts add',
    summary: 'add a part (revision 1)',
    usage: 'ductbench parts add KIND --name NAME (--file FILE | --json JSON) [--notes TEXT] [--data-dir DIR]',
    options: { name: { kind: 'string', value: 'NAME', help: 'your name for it (unique among parts of its kind)' }, file: DOC_FILE, json: DOC_TEXT, notes: { kind: 'string', value: 'TEXT', help: 'notes' }, 'data-dir': DATA_DIR },
    positionals: [1, 1],
    notes: [`KIND is one of ${PART_KINDS.join(', ')}. Example: ductbench parts add duct --name KD-1 --json '{"bore_diameter_m":0.2565,"inlet_lip_radius_m":0.012,"exit_diameter_m":0.2664,"length_m":0.09,"mass_kg":0.085}'`],
  },
  edit: {
    name: 'parts edit',
    summary: 'revise a part: the fields given change (null removes an optional one), as its next revision',
    usage: 'ductbench parts edit ID [--file FILE | --json JSON] [--notes TEXT] [--name NAME] [--data-dir DIR]',
    options: { file: DOC_FILE, json: DOC_TEXT, notes: { kind: 'string', value: 'TEXT', help: 'new notes' }, name: { kind: 'string', value: 'NAME', help: 'new name (a label: no new revision)' }, 'data-dir': DATA_DIR },
    positionals: [1, 1],
    notes: ['Sessions keep the revision they ran with: a revision is never changed once written.'],
  },
  retire: {
    name: 'parts retire',
    summary: 'retire a part: it can no longer be mounted; sessions that used it keep it',
    usage: 'ductbench parts retire ID [--data-dir DIR]',
    options: { 'data-dir': DATA_DIR },
    positionals: [1, 1],
  },
  import: {
    name: 'parts import',
    summary: "put a rig file's propeller, motor, ESC, supply and duct into the library (equal parts are found again)",
    usage: 'ductbench parts import RIG_FILE [--data-dir DIR] [--json]',
    options: { 'data-dir': DATA_DIR, json: JSON_OUT },
    positionals: [1, 1],
    notes: ["The rig's limits section belongs to the bench, not to a part: it stays in the file (serve --rig FILE applies it)."],
  },
  export: {
    name: 'parts export',
    summary: 'write a rig file from parts, or from the revisions a session ran with',
    usage: 'ductbench parts export (--propeller ID --motor ID --esc ID --supply ID [--duct ID|none] | --session ID) [--name NAME] [--out FILE] [--data-dir DIR]',
    options: {
      ...Object.fromEntries(PART_KINDS.map((k) => [k, slotOption(k)])),
      session: { kind: 'int', value: 'ID', help: 'the parts a recorded session ran with', min: 1 },
      name: { kind: 'string', value: 'NAME', help: 'name of the rig (default: the parts\' names)' },
      out: { kind: 'string', value: 'FILE', help: 'write here instead of standard output' },
      'data-dir': DATA_DIR,
    },
  },
};

function topHelp(): string {
  const w = Math.max(...Object.keys(SUB).map((k) => k.length)) + 4;
  return ['usage: ductbench parts <list|show|add|edit|retire|import|export> [options]', '', ...Object.entries(SUB).map(([k, s]) => `  ${k.padEnd(w)}${s.summary}`), ''].join('\n');
}

function readDocument(o: Parsed['opts'], required: boolean): Record<string, unknown> | undefined {
  if (o.file !== undefined && o.json !== undefined) throw new UsageError('give --file or --json, not both');
  let text: string | undefined;
  let from = '--json';
  if (o.file !== undefined) {
    from = String(o.file);
    try {
      text = readFileSync(String(o.file), 'utf8');
    } catch (err) {
      throw new UsageError(`cannot read ${o.file}: ${(err as NodeJS.ErrnoException).code ?? (err as Error).message}`);
    }
  } else if (o.json !== undefined) text = String(o.json);
  if (text === undefined) {
    if (required) throw new UsageError("the part's fields are required: --file FILE or --json JSON");
    return undefined;
  }
  let doc: unknown;
  try {
    doc = JSON.parse(text);
  } catch (err) {
    throw new UsageError(`${from} is not JSON: ${(err as Error).message}`);
  }
  if (typeof doc !== 'object' || doc === null || Array.isArray(doc)) throw new UsageError(`${from} must hold a JSON object`);
  return doc as Record<string, unknown>;
}

function table(rows: PartRevision[]): string {
  if (rows.length === 0) return 'no parts\n';
  const head = ['id', 'kind', 'name', 'rev', 'used by', 'what'];
  const body = rows.map((p) => [String(p.id), p.kind, p.name + (p.retired_at !== null ? ' (retired)' : ''), String(p.revision), String(p.used_by), partSummary(p.kind, p.spec)]);
  const w = head.map((h, i) => Math.max(h.length, ...body.map((b) => b[i].length)));
  return [head, ...body].map((r) => r.map((c, i) => c.padEnd(w[i])).join('  ').trimEnd()).join('\n') + '\n';
}

function exportRig(lib: PartsLibrary, store: SessionStore, o: Parsed['opts']): RigSpec {
  const name = o.name !== undefined ? String(o.name) : undefined;
  if (o.session !== undefined) {
    if (PART_KINDS.some((k) => o[k] !== undefined)) throw new UsageError('give --session or the parts, not both');
    const s = store.get(Number(o.session));
    if (s.mount.length === 0) {
      // A session from before the library (or recorded without one) still has its rig snapshot.
      if (!s.rig) throw new UsageError(`session ${s.id} recorded no rig`);
      const { limits: _l, sim: _s, ...rig } = s.rig;
      return parseRig({ ...rig, ...(name ? { name } : {}) });
    }
    const at = (k: PartKind) => {
      const m = s.mount.find((x) => x.slot === k);
      return m ? lib.get(m.part_id, m.revision) : null;
    };
    return mountOf({ propeller: at('propeller') as never, motor: at('motor') as never, esc: at('esc') as never, supply: at('supply') as never, duct: at('duct') as never }, name ?? s.rig_name ?? undefined).rig;
  }
  const pick = (k: PartKind): PartRevision | null => {
    const v = o[k];
    if (v === undefined) {
      if (k === 'duct') throw new UsageError('--duct ID or --duct none is required (none for an open propeller)');
      throw new UsageError(`--${k} ID is required (or --session ID)`);
    }
    if (k === 'duct' && v === 'none') return null;
    const ref = parsePartRef(String(v), `--${k}`);
    const p = lib.get(ref.id, ref.revision);
    if (p.kind !== k) throw new UsageError(`--${k}: part ${ref.id} is a ${p.kind} (${p.name})`);
    return p;
  };
  const parts = { propeller: pick('propeller'), motor: pick('motor'), esc: pick('esc'), supply: pick('supply'), duct: pick('duct') } as ResolvedMount['parts'];
  return mountOf(parts, name).rig;
}

async function run(sub: string, p: Parsed, io: CliIo): Promise<number> {
  const o = p.opts;
  const dataDir = (o['data-dir'] as string | undefined) ?? DEFAULT_DATA_DIR;
  // Usage first, so a typo never creates a data folder.
  const kind = sub === 'add' ? parseKind(p.positionals[0]) : o.kind !== undefined ? parseKind(String(o.kind)) : undefined;
  const ref = sub === 'show' || sub === 'edit' || sub === 'retire' ? parsePartRef(p.positionals[0]) : null;
  if (sub === 'edit' && ref!.revision !== undefined) throw new UsageError('edit takes a part id (the next revision follows its latest)');
  if (sub === 'add' && o.name === undefined) throw new UsageError('--name NAME is required');
  const doc = sub === 'add' || sub === 'edit' ? readDocument(o, sub === 'add') : undefined;
  let rigIn: RigSpec | null = null;
  if (sub === 'import') {
    let text: string;
    try {
      text = readFileSync(p.positionals[0], 'utf8');
    } catch (err) {
      io.stderr(`ductbench parts import: cannot read ${p.positionals[0]}: ${(err as NodeJS.ErrnoException).code ?? (err as Error).message}\n`);
      return 1;
    }
    try {
      rigIn = parseRig(JSON.parse(text));
    } catch (err) {
      io.stderr(`ductbench parts import: ${p.positionals[0]}: ${(err as Error).message}\n`);
      return 2;
    }
  }

  const store = SessionStore.open(dataDir);
  try {
    const lib = new PartsLibrary(store.db);
    switch (sub) {
      case 'list': {
        const rows = lib.list({ ...(kind ? { kind } : {}), retired: !!o.retired });
        io.stdout(o.json ? JSON.stringify(rows, null, 2) + '\n' : table(rows));
        return 0;
      }
      case 'show': {
        const part = lib.get(ref!.id, ref!.revision);
        const history = lib.history(ref!.id);
        const sessions = lib.sessionsUsing(ref!.id);
        if (o.json) {
          io.stdout(JSON.stringify({ ...part, revisions: history.map((h) => ({ revision: h.revision, created_at: h.created_at, used_by: h.used_by })), sessions }, null, 2) + '\n');
          return 0;
        }
        io.stdout(
          [
            `${partLabel(part)}${part.revision < part.latest ? ` (latest is r${part.latest})` : ''}${part.retired_at !== null ? ', retired' : ''}`,
            `  ${partSummary(part.kind, part.spec)}`,
            ...(part.notes ? [`  notes: ${part.notes}`] : []),
            ...(Object.keys(part.limits).length ? [`  limits: ${Object.entries(part.limits).map(([k, v]) => `${k} ${v}`).join(', ')}`] : []),
            `  fields: ${JSON.stringify(part.spec)}`,
            `  revisions: ${history.map((h) => `r${h.revision} ${new Date(h.created_at).toISOString().slice(0, 16).replace('T', ' ')} (${h.used_by} sessions)`).join('; ')}`,
            `  used by sessions: ${sessions.join(', ') || 'none'}`,
          ].join('\n') + '\n',
        );
        return 0;
      }
      case 'add': {
        const part = lib.add(kind!, String(o.name), { ...doc, ...(o.notes !== undefined ? { notes: String(o.notes) } : {}) });
        io.stdout(`added ${partLabel(part)}: ${partSummary(part.kind, part.spec)}\n`);
        return 0;
      }
      case 'edit': {
        const before = lib.get(ref!.id);
        const patch = { ...(doc ?? {}), ...(o.notes !== undefined ? { notes: String(o.notes) } : {}) };
        if (Object.keys(patch).length === 0 && o.name === undefined) throw new UsageError('nothing to change: give --file, --json, --notes or --name');
        const part = lib.edit(ref!.id, { patch, ...(o.name !== undefined ? { name: String(o.name) } : {}) });
        io.stdout(part.revision > before.revision ? `${partLabel(part)}: new revision (sessions on r${before.revision} keep it)\n` : `${partLabel(part)}: no field changed, no new revision\n`);
        return 0;
      }
      case 'retire': {
        const part = lib.retire(ref!.id);
        io.stdout(`retired ${partLabel(part)} (${part.used_by} sessions ran with this revision and keep it)\n`);
        return 0;
      }
      case 'import': {
        const r = lib.importRig(rigIn!);
        if (o.json) {
          const ids = (xs: PartRevision[]) => xs.map((x) => ({ id: x.id, kind: x.kind, name: x.name, revision: x.revision }));
          io.stdout(JSON.stringify({ created: ids(r.created), revised: ids(r.revised), reused: ids(r.reused) }) + '\n');
        } else {
          for (const [what, xs] of [['added', r.created], ['revised', r.revised], ['already in the library', r.reused]] as const) for (const x of xs) io.stdout(`${what}: ${partLabel(x)}\n`);
          if (rigIn!.limits) io.stderr(`note: the rig's limits section stays with the rig file (the bench's limits; serve --rig applies them)\n`);
        }
        return 0;
      }
      case 'export': {
        const rig = exportRig(lib, store, o);
        const text = JSON.stringify(rig, null, 2) + '\n';
        if (o.out !== undefined) {
          writeFileAtomic(String(o.out), (w) => w(text));
          io.stderr(`wrote ${o.out}\n`);
        } else io.stdout(text);
        return 0;
      }
    }
    return 2;
  } finally {
    store.close();
  }
}

/** Entry point for `ductbench parts`; argv is what follows "parts". */
export async function partsMain(argv: readonly string[], io: CliIo): Promise<number> {
  const [sub, ...rest] = argv;
  if (sub === undefined || sub === '--help' || sub === '-h') {
    io.stdout(topHelp());
    return sub === undefined ? 2 : 0;
  }
  const spec = SUB[sub];
  if (!spec) {
    io.stderr(`ductbench parts: unknown subcommand ${JSON.stringify(sub)} (list, show, add, edit, retire, import, export)\n`);
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
    // A part document that breaks a rule is bad input, like a bad flag.
    if (err instanceof RigError) {
      io.stderr(`ductbench ${spec.name}: ${err.message}\n`);
      return 2;
    }
    return reportError(`ductbench ${spec.name}`, err, io);
  }
}

