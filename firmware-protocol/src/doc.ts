// Renders the reference tables of PROTOCOL.md from the declaration in messages.ts, so the document cannot
// drift from the code: test/protocol-doc.test.ts compares the generated section of PROTOCOL.md with
// renderGeneratedTables() and rewrites it when run with DUCTBENCH_WRITE_DOCS=1. Pure: strings in, strings out.

import { describeRule } from './codec.js';
import {
  DEFAULT_HEARTBEAT_TIMEOUT_MS,
  FAULT_CODES,
  HEARTBEAT_INTERVAL_MS,
  MAX_LINE_BYTES,
  MESSAGES,
  PROTOCOL_VERSION,
  REFUSAL_CODES,
  SEQ_MODULO,
  type FaultCode,
  type FieldSpec,
  type MessageSpec,
  type MessageTag,
  type RefusalCode,
} from './messages.js';
import { HOST_RULES, lineBudget } from './host-rules.js';

export const GENERATED_BEGIN = '<!-- BEGIN GENERATED: tables -->';
export const GENERATED_END = '<!-- END GENERATED: tables -->';

// The code lists in messages.ts carry their meanings only as comments, which a program cannot read. These maps
// are typed by the code unions, so adding a code there without a meaning here fails the type check.
export const FAULT_MEANINGS: Readonly<Record<FaultCode, string>> = {
  none: 'No fault latched.',
  estop: 'An emergency stop (STOP, or STOP why=estop) was received.',
  heartbeat: 'No host heartbeat arrived within the time-out after the handshake.',
  host_trip: 'The host cut the throttle because one of its own limits tripped (STOP why=host_trip).',
  brownout: "The supply voltage fell below the firmware's floor.",
  reset: 'The controller restarted other than by power-on (watchdog, brown-out reset, reset line); latched at boot so a restart is never silent.',
  sensor: 'A required sensor stopped answering.',
  overcurrent: "The firmware's own hard current limit tripped.",
};

export const REFUSAL_MEANINGS: Readonly<Record<RefusalCode, string>> = {
  not_ready: 'No successful handshake (HELLO with a matching protocol) yet.',
  latched: 'A fault is latched; only HELLO, HB, STATUS, STOP, CLEAR, DISARM and BYE are carried out.',
  not_armed: 'A throttle above zero was asked for while disarmed.',
  throttle_not_zero: 'ARM was asked for while the commanded throttle is above zero.',
  above_ceiling: 'The throttle asked for is above the hard ceiling (IDENT thrmax): refused, never clamped.',
  bad_value: 'The line had a good checksum, but a field is unknown, repeated, missing or breaks its rule.',
  unsupported: 'The command, channel or capability is not available on this firmware.',
  busy: 'A tare or calibration is still running, TARE was asked for while armed, or the command queue is full.',
};

const DIRECTION_TEXT = { d2h: 'device to host', h2d: 'host to device' } as const;

/** Escapes text for a Markdown table cell: a bare '|' would end the cell. */
export function cell(text: string): string {
  return text.replace(/\\/g, '\\\\').replace(/\|/g, '\\|').replace(/\r?\n/g, ' ');
}

function table(head: readonly string[], rows: readonly (readonly string[])[]): string {
  const line = (cells: readonly string[]): string => '| ' + cells.map(cell).join(' | ') + ' |';
  return [line(head), '|' + head.map(() => ' --- |').join(''), ...rows.map(line)].join('\n');
}

function yesNo(b: boolean): string {
  return b ? 'yes' : 'no';
}

function ruleText(f: FieldSpec): string {
  const rule = describeRule(f);
  const d = f.decimals ?? 3;
  return f.kind === 'num' ? `${rule}, sent with ${d} ${d === 1 ? 'decimal' : 'decimals'}` : rule;
}

/** The line's shape with every field present, e.g. "THR <seq> v=<num>". */
export function lineShape(tag: MessageTag): string {
  const spec: MessageSpec = MESSAGES[tag];
  const parts = spec.fields.map((f) => {
    const p = `${f.key}=<${f.kind}>`;
    return f.required ? p : `[${p}]`;
  });
  return [tag, '<seq>', ...parts].join(' ') + '*<crc>';
}

/** One table per message: its fields, rules, units and meanings. */
export function renderMessageTable(tag: MessageTag): string {
  const spec: MessageSpec = MESSAGES[tag];
  const out: string[] = [
    `### ${tag}`,
    '',
    `${DIRECTION_TEXT[spec.dir]}; safety-relevant: ${yesNo(spec.safety)}; answered with ACK/NAK: ${yesNo(spec.acked)}.`,
    '',
    spec.doc,
    '',
    '`' + lineShape(tag) + '`',
    '',
  ];
  if (spec.fields.length === 0) {
    out.push('No fields.');
  } else {
    out.push(
      table(
        ['field', 'rule', 'unit', 'required', 'meaning'],
        spec.fields.map((f) => ['`' + f.key + '`', ruleText(f), f.unit ?? '-', yesNo(f.required), f.doc]),
      ),
    );
  }
  return out.join('\n');
}

export function renderSummaryTable(): string {
  const tags = Object.keys(MESSAGES) as MessageTag[];
  return table(
    ['tag', 'direction', 'safety-relevant', 'acknowledged', 'purpose'],
    tags.map((t) => {
      const s: MessageSpec = MESSAGES[t];
      return ['`' + t + '`', DIRECTION_TEXT[s.dir], yesNo(s.safety), yesNo(s.acked), s.doc];
    }),
  );
}

export function renderFaultTable(): string {
  return table(['fault', 'meaning'], FAULT_CODES.map((c) => ['`' + c + '`', FAULT_MEANINGS[c]]));
}

export function renderRefusalTable(): string {
  return table(['why', 'meaning'], REFUSAL_CODES.map((c) => ['`' + c + '`', REFUSAL_MEANINGS[c]]));
}

/** The numeric constants the prose refers to by name. */
export const PROTOCOL_CONSTANTS: ReadonlyArray<readonly [name: string, value: number, meaning: string]> = [
  ['PROTOCOL_VERSION', PROTOCOL_VERSION, 'Protocol version carried in HELLO and IDENT.'],
  ['MAX_LINE_BYTES', MAX_LINE_BYTES, 'Longest line in bytes, newline (and a trailing CR) not counted.'],
  ['SEQ_MODULO', SEQ_MODULO, 'Sequence numbers run 0..SEQ_MODULO-1 per direction, then wrap.'],
  ['HEARTBEAT_INTERVAL_MS', HEARTBEAT_INTERVAL_MS, 'How often the host sends HB, in ms.'],
  ['DEFAULT_HEARTBEAT_TIMEOUT_MS', DEFAULT_HEARTBEAT_TIMEOUT_MS, 'Heartbeat loss time-out the firmware applies by default, in ms.'],
];

export function renderConstantsTable(): string {
  return table(['constant', 'value', 'meaning'], PROTOCOL_CONSTANTS.map(([n, v, m]) => ['`' + n + '`', String(v), m]));
}

export function renderHostRulesTable(): string {
  return table(['rule', 'value', 'what the host does'], HOST_RULES.map(([n, v, m]) => ['`' + n + '`', String(v), m]));
}

/** Worked examples of the byte budget, computed by the same function the host and the checker use. */
export const BUDGET_EXAMPLES: ReadonlyArray<readonly [caps: string, baud: number]> = [
  ['thrust@80,voltage@100,current@100,rpm@10,temp@2', 115200],
  ['thrust@80,voltage@100,current@100,rpm@100,temp@10', 115200],
  ['thrust@80,voltage@1000,current@1000,rpm@200', 115200],
  ['thrust@80,voltage@1000,current@1000,rpm@200', 1000000],
];

export function renderBudgetTable(): string {
  return table(
    ['caps', 'baud', 'worst case, bytes/s', 'line carries, bytes/s', 'verdict'],
    BUDGET_EXAMPLES.map(([caps, baud]) => {
      const rates: Record<string, number> = {};
      for (const item of caps.split(',')) {
        const [n, r] = item.split('@');
        rates[n] = Number(r);
      }
      const b = lineBudget(rates, baud);
      return ['`' + caps + '`', String(baud), String(b.bytesPerSecond), String(b.capacityPerSecond), `${Math.round(b.utilisation * 100)} %: ${b.fits ? 'fits' : 'does not fit (the host warns)'}`];
    }),
  );
}

/** Everything between the markers of PROTOCOL.md (markers excluded), ending in a newline. */
export function renderGeneratedTables(): string {
  const tags = Object.keys(MESSAGES) as MessageTag[];
  const parts = [
    '<!-- Generated from firmware-protocol/src/messages.ts by firmware-protocol/src/doc.ts. Do not edit by hand:',
    '     run DUCTBENCH_WRITE_DOCS=1 npx vitest run test/protocol-doc.test.ts -->',
    '',
    '## Reference tables',
    '',
    '### Constants',
    '',
    renderConstantsTable(),
    '',
    '### Host rules',
    '',
    'Every figure the host enforces, from `firmware-protocol/src/host-rules.ts`, which the host itself reads.',
    '',
    renderHostRulesTable(),
    '',
    '### Byte budget examples',
    '',
    'Worst case of the declared rates (every field at its widest, STAT every `STAT_MAX_INTERVAL_MS`) against the line at 10 bits a byte:',
    '',
    renderBudgetTable(),
    '',
    '### Messages',
    '',
    renderSummaryTable(),
    '',
    ...tags.flatMap((t) => [renderMessageTable(t), '']),
    '### Fault codes',
    '',
    'Carried in `STAT fault=`; `STOP why=` may name `estop` or `host_trip`.',
    '',
    renderFaultTable(),
    '',
    '### Refusal codes',
    '',
    'Carried in `NAK why=`. A refused command changes nothing.',
    '',
    renderRefusalTable(),
  ];
  return parts.join('\n') + '\n';
}

export type SpliceResult = { ok: true; text: string; changed: boolean } | { ok: false; error: string };

/** Replaces the generated section of a document. Refuses (rather than guesses) when the markers are missing or repeated. */
export function spliceGenerated(doc: string, generated: string = renderGeneratedTables()): SpliceResult {
  const b = doc.indexOf(GENERATED_BEGIN);
  const e = doc.indexOf(GENERATED_END);
  if (b < 0 || e < 0) return { ok: false, error: 'generated-section markers not found' };
  if (doc.indexOf(GENERATED_BEGIN, b + 1) >= 0 || doc.indexOf(GENERATED_END, e + 1) >= 0) return { ok: false, error: 'generated-section markers appear more than once' };
  if (e < b) return { ok: false, error: 'END marker comes before BEGIN marker' };
  const head = doc.slice(0, b + GENERATED_BEGIN.length);
  const tail = doc.slice(e);
  const text = head + '\n' + generated + tail;
  return { ok: true, text, changed: text !== doc };
}

/** The current generated section of a document (between the markers, markers excluded), or null. */
export function extractGenerated(doc: string): string | null {
  const b = doc.indexOf(GENERATED_BEGIN);
  const e = doc.indexOf(GENERATED_END);
  if (b < 0 || e < b) return null;
  const inner = doc.slice(b + GENERATED_BEGIN.length, e);
  return inner.startsWith('\n') ? inner.slice(1) : inner;
}
