// A small declarative command-line parser: each command declares its options once, and the parser, the
// errors and the --help text come from that declaration. Unknown options are errors (a mistyped safety
// option must never be ignored).

export type OptionKind = 'string' | 'int' | 'number' | 'flag';

export interface OptionSpec {
  kind: OptionKind;
  /** Placeholder shown in help, e.g. FILE. */
  value?: string;
  help: string;
  /** May be given more than once (values collected in order). */
  repeat?: boolean;
  min?: number;
  max?: number;
}

export interface CommandSpec {
  name: string;
  summary: string;
  usage: string;
  options: Record<string, OptionSpec>;
  /** Positional arguments allowed: [min, max]. */
  positionals?: [number, number];
  /** Extra paragraphs for --help. */
  notes?: string[];
}

export class UsageError extends Error {
  constructor(message: string) {
    super(message);
    this.name = 'UsageError';
  }
}

export interface Parsed {
  opts: Record<string, string | number | boolean | (string | number)[]>;
  positionals: string[];
  help: boolean;
}

export function parseArgs(spec: CommandSpec, argv: readonly string[]): Parsed {
  const opts: Parsed['opts'] = {};
  const positionals: string[] = [];
  let help = false;
  for (let i = 0; i < argv.length; i++) {
    const a = argv[i];
    if (a === '--help' || a === '-h') {
      help = true;
      continue;
    }
    if (a === '--') {
      positionals.push(...argv.slice(i + 1));
      break;
    }
    if (!a.startsWith('--')) {
      positionals.push(a);
      continue;
    }
    const eq = a.indexOf('=');
    const name = eq > 0 ? a.slice(2, eq) : a.slice(2);
    const o = spec.options[name];
    if (!o) throw new UsageError(`unknown option --${name}`);
    let value: string | number | boolean;
    if (o.kind === 'flag') {
      if (eq > 0) throw new UsageError(`--${name} takes no value`);
      value = true;
    } else {
      let raw: string | undefined;
      if (eq > 0) raw = a.slice(eq + 1);
      else {
        raw = argv[i + 1];
        if (raw === undefined || (raw.startsWith('--') && raw.length > 2)) throw new UsageError(`--${name} needs a value (${o.value ?? o.kind})`);
        i++;
      }
      value = convert(name, o, raw);
    }
    if (o.repeat) {
      const list = (opts[name] as (string | number)[] | undefined) ?? [];
      list.push(value as string | number);
      opts[name] = list;
    } else {
      if (name in opts) throw new UsageError(`--${name} given twice`);
      opts[name] = value;
    }
  }
  const [min, max] = spec.positionals ?? [0, 0];
  if (!help) {
    if (positionals.length < min) throw new UsageError(`expected ${min === max ? min : `at least ${min}`} argument${min === 1 ? '' : 's'}`);
    if (positionals.length > max) throw new UsageError(`unexpected argument ${JSON.stringify(positionals[max])}`);
  }
  return { opts, positionals, help };
}

function convert(name: string, o: OptionSpec, raw: string): string | number {
  if (o.kind === 'string') {
    if (raw === '') throw new UsageError(`--${name} must not be empty`);
    return raw;
  }
  const n = Number(raw);
  if (raw.trim() === '' || !Number.isFinite(n)) throw new UsageError(`--${name}: ${JSON.stringify(raw)} is not a number`);
  if (o.kind === 'int' && !Number.isInteger(n)) throw new UsageError(`--${name}: ${raw} is not a whole number`);
  if (o.min !== undefined && n < o.min) throw new UsageError(`--${name}: ${raw} is below ${o.min}`);
  if (o.max !== undefined && n > o.max) throw new UsageError(`--${name}: ${raw} is above ${o.max}`);
  return n;
}

export function helpText(spec: CommandSpec): string {
  const lines = [`ductbench ${spec.name}: ${spec.summary}`, '', `usage: ${spec.usage}`, ''];
  const names = Object.keys(spec.options);
  if (names.length) {
    lines.push('options:');
    const left = names.map((n) => {
      const o = spec.options[n];
      return `  --${n}${o.kind === 'flag' ? '' : ' ' + (o.value ?? o.kind.toUpperCase())}`;
    });
    const w = Math.max(...left.map((l) => l.length)) + 2;
    names.forEach((n, i) => lines.push(left[i].padEnd(w) + spec.options[n].help + (spec.options[n].repeat ? ' (repeatable)' : '')));
    lines.push(`  --help`.padEnd(w) + 'show this help');
  }
  for (const p of spec.notes ?? []) lines.push('', p);
  return lines.join('\n') + '\n';
}

/** A library part, "12", or one revision of it, "12@3" (parts export, sessions list --part). */
export function parsePartRef(s: string, what = 'part'): { id: number; revision?: number } {
  const m = /^(\d+)(?:@(\d+))?$/.exec(s);
  if (!m || Number(m[1]) < 1 || (m[2] !== undefined && Number(m[2]) < 1)) throw new UsageError(`${what} must be a part id, optionally @revision (e.g. 12 or 12@3), not ${JSON.stringify(s)}`);
  return { id: Number(m[1]), ...(m[2] !== undefined ? { revision: Number(m[2]) } : {}) };
}
