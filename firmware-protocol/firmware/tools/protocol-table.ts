// Renders the C++ protocol table (core/protocol_ids.h and core/protocol_table.cpp) from the one declaration in
// firmware-protocol/src/messages.ts, so the firmware's codec follows the declaration instead of a hand copy.
// test/firmware.test.ts fails when the committed files differ from this output; to rewrite them run
// DUCTBENCH_WRITE_FW_TABLE=1 npx vitest run test/firmware-table.test.ts
//
// The strings and tables go to flash on AVR (FW_FLASH is PROGMEM there): a Uno-class board has 2 KiB of RAM
// and the table alone would take more than half of it.

import {
  CHANNELS,
  DEFAULT_HEARTBEAT_TIMEOUT_MS,
  FAULT_CODES,
  HEARTBEAT_INTERVAL_MS,
  MAX_LINE_BYTES,
  MESSAGES,
  PROTOCOL_VERSION,
  REFUSAL_CODES,
  SEQ_MODULO,
  type FieldSpec,
  type MessageSpec,
} from '../../src/messages.js';

const HEADER = '// GENERATED from firmware-protocol/src/messages.ts by firmware-protocol/firmware/tools/protocol-table.ts.\n// Do not edit: run DUCTBENCH_WRITE_FW_TABLE=1 npx vitest run test/firmware-table.test.ts\n';

const KIND: Record<FieldSpec['kind'], string> = {
  uint: 'KIND_UINT',
  int: 'KIND_INT',
  num: 'KIND_NUM',
  bool: 'KIND_BOOL',
  token: 'KIND_TOKEN',
  enum: 'KIND_ENUM',
  list: 'KIND_LIST',
  text: 'KIND_TEXT',
};

const ident = (s: string): string => s.toUpperCase().replace(/[^A-Z0-9]/g, '_');

/** Shared value lists get a named C++ enum; lists local to one field are named after it. */
function enumName(tag: string, f: FieldSpec): string {
  if (f.values === FAULT_CODES) return 'FAULT';
  if (f.values === REFUSAL_CODES) return 'WHY';
  if (f.values === CHANNELS) return 'CH';
  return `E_${tag}_${ident(f.key)}`;
}

function num(n: number): string {
  // Every bound in v1 is an integer; a fraction would need more care with float on AVR.
  if (!Number.isInteger(n)) throw new Error(`non-integer bound ${n}`);
  return `${n}.0`;
}

const entries = (): [string, MessageSpec][] => Object.entries(MESSAGES) as [string, MessageSpec][];

export function renderIdsHeader(): string {
  const out: string[] = [HEADER, '#pragma once', '', '#include <stdint.h>', '', 'namespace db {', ''];
  out.push(`constexpr uint16_t PROTOCOL_VERSION = ${PROTOCOL_VERSION};`);
  out.push(`constexpr uint16_t MAX_LINE_BYTES = ${MAX_LINE_BYTES};`);
  out.push(`constexpr uint32_t SEQ_MODULO = ${SEQ_MODULO}UL;`);
  out.push(`constexpr uint16_t DEFAULT_HEARTBEAT_TIMEOUT_MS = ${DEFAULT_HEARTBEAT_TIMEOUT_MS};`);
  out.push(`constexpr uint16_t HEARTBEAT_INTERVAL_MS = ${HEARTBEAT_INTERVAL_MS};`);
  const maxFields = Math.max(...entries().map(([, m]) => m.fields.length));
  out.push(`constexpr uint8_t MAX_FIELDS = ${maxFields};`, '');
  out.push('enum MsgId : uint8_t {');
  for (const [tag] of entries()) out.push(`  MSG_${tag},`);
  out.push('  MSG_COUNT', '};', '');
  out.push('// Field positions, in declaration order (the order an encoder writes them).');
  for (const [tag, m] of entries()) {
    if (m.fields.length === 0) continue;
    out.push(`enum : uint8_t { ${m.fields.map((f, i) => `F_${tag}_${ident(f.key)} = ${i}`).join(', ')} };`);
  }
  out.push('');
  const done = new Set<string>();
  for (const [tag, m] of entries()) {
    for (const f of m.fields) {
      if (f.kind !== 'enum') continue;
      const name = enumName(tag, f);
      if (done.has(name)) continue;
      done.add(name);
      const items = f.values!.map((v, i) => `${name}_${ident(v)} = ${i}`);
      out.push(`enum : uint8_t { ${items.join(', ')}, ${name}_COUNT = ${f.values!.length} };`);
    }
  }
  out.push('', '}  // namespace db', '');
  return out.join('\n');
}

export function renderTableSource(): string {
  const out: string[] = [HEADER, '#include "protocol_table.h"', '', 'namespace db {', ''];
  const strings = new Map<string, string>();
  const str = (s: string): string => {
    let n = strings.get(s);
    if (!n) {
      n = `S${strings.size}`;
      strings.set(s, n);
    }
    return n;
  };
  const lists = new Map<string, { name: string; values: readonly string[] }>();
  const tables: string[] = [];
  for (const [tag, m] of entries()) {
    str(tag);
    if (m.fields.length === 0) continue;
    const rows: string[] = [];
    for (const f of m.fields) {
      let values = 'nullptr';
      let nvalues = 0;
      if (f.kind === 'enum') {
        const name = `V_${enumName(tag, f)}`;
        if (!lists.has(name)) lists.set(name, { name, values: f.values! });
        values = name;
        nvalues = f.values!.length;
      }
      const flags = [f.required ? 'FIELD_REQUIRED' : null, f.min !== undefined ? 'FIELD_HAS_MIN' : null, f.max !== undefined ? 'FIELD_HAS_MAX' : null].filter(Boolean).join(' | ') || '0';
      rows.push(`  {${str(f.key)}, ${KIND[f.kind]}, ${f.decimals ?? 0}, ${flags}, ${nvalues}, ${values}, ${num(f.min ?? 0)}, ${num(f.max ?? 0)}},`);
    }
    tables.push(`static const FieldDef FIELDS_${tag}[] FW_FLASH = {\n${rows.join('\n')}\n};`);
  }
  for (const l of lists.values()) for (const v of l.values) str(v);
  for (const [s, n] of strings) out.push(`static const char ${n}[] FW_FLASH = "${s}";`);
  out.push('');
  for (const l of lists.values()) out.push(`static const char* const ${l.name}[] FW_FLASH = {${l.values.map((v) => str(v)).join(', ')}};`);
  out.push('', ...tables, '');
  out.push('const MsgDef MESSAGE_TABLE[MSG_COUNT] FW_FLASH = {');
  for (const [tag, m] of entries()) {
    const dir = m.dir === 'd2h' ? 'DIR_D2H' : 'DIR_H2D';
    const fields = m.fields.length ? `FIELDS_${tag}` : 'nullptr';
    out.push(`  {${str(tag)}, ${dir}, ${m.acked}, ${m.safety}, ${m.fields.length}, ${fields}},`);
  }
  out.push('};', '', '}  // namespace db', '');
  return out.join('\n');
}
