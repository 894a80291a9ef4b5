// PROTOCOL.md against the code: the generated tables must equal doc.ts output (rewritten when
// DUCTBENCH_WRITE_DOCS=1), every example line must decode, and the prose's numbers and C code must agree with it.

import { execFileSync } from 'node:child_process';
import { existsSync, mkdtempSync, readFileSync, renameSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import { join } from 'node:path';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { decodeLine, encodeLine, withChecksum } from '../firmware-protocol/src/codec.js';
import { crc16 } from '../firmware-protocol/src/crc.js';
import {
  GENERATED_BEGIN,
  GENERATED_END,
  PROTOCOL_CONSTANTS,
  cell,
  extractGenerated,
  lineShape,
  renderFaultTable,
  renderGeneratedTables,
  renderMessageTable,
  renderRefusalTable,
  renderSummaryTable,
  spliceGenerated,
} from '../firmware-protocol/src/doc.js';
import { HOST_RULES } from '../firmware-protocol/src/host-rules.js';
import { FAULT_CODES, MESSAGES, REFUSAL_CODES, type Direction, type MessageSpec, type MessageTag } from '../firmware-protocol/src/messages.js';

const docPath = fileURLToPath(new URL('../firmware-protocol/PROTOCOL.md', import.meta.url));
const tags = Object.keys(MESSAGES) as MessageTag[];

function readDoc(): string {
  return readFileSync(docPath, 'utf8');
}

describe('generated tables in PROTOCOL.md', () => {
  it('equal what doc.ts renders from messages.ts', () => {
    if (process.env.DUCTBENCH_WRITE_DOCS === '1') {
      const r = spliceGenerated(readDoc());
      if (!r.ok) throw new Error(r.error);
      if (r.changed) {
        // Temp file then rename, so an interrupted run never leaves half a document.
        const tmp = docPath + '.tmp';
        writeFileSync(tmp, r.text);
        renameSync(tmp, docPath);
      }
    }
    const inner = extractGenerated(readDoc());
    expect(inner, `markers ${GENERATED_BEGIN} ... ${GENERATED_END} missing`).not.toBeNull();
    // On failure: run DUCTBENCH_WRITE_DOCS=1 npx vitest run test/protocol-doc.test.ts
    expect(inner).toBe(renderGeneratedTables());
  });
});

describe('doc.ts rendering', () => {
  it('gives every message a table naming every field, its unit and its rule', () => {
    for (const tag of tags) {
      const spec: MessageSpec = MESSAGES[tag];
      const t = renderMessageTable(tag);
      expect(t.startsWith(`### ${tag}\n`)).toBe(true);
      expect(t).toContain(cell(spec.doc));
      expect(t).toContain(lineShape(tag));
      const rows = t.split('\n').filter((l) => l.startsWith('| `'));
      expect(rows).toHaveLength(spec.fields.length);
      spec.fields.forEach((f, i) => {
        expect(rows[i].startsWith('| `' + f.key + '` |')).toBe(true);
        if (f.unit) expect(rows[i]).toContain(` ${f.unit} |`);
        expect(rows[i]).toContain(f.required ? '| yes |' : '| no |');
      });
    }
  });

  it('escapes the | of enum rules so table cells stay intact', () => {
    const t = renderMessageTable('NAK');
    const whyRow = t.split('\n').find((l) => l.startsWith('| `why`'))!;
    expect(whyRow).toContain('one of ' + REFUSAL_CODES.join('\\|'));
    // Unescaped pipes separate exactly five cells.
    expect(whyRow.replace(/\\\|/g, '').split('|')).toHaveLength(7);
  });

  it('lists every message, fault and refusal once', () => {
    const summary = renderSummaryTable();
    for (const tag of tags) expect(summary.split('\n').filter((l) => l.startsWith('| `' + tag + '` |'))).toHaveLength(1);
    const faults = renderFaultTable();
    for (const c of FAULT_CODES) expect(faults.split('\n').filter((l) => l.startsWith('| `' + c + '` |'))).toHaveLength(1);
    const refusals = renderRefusalTable();
    for (const c of REFUSAL_CODES) expect(refusals.split('\n').filter((l) => l.startsWith('| `' + c + '` |'))).toHaveLength(1);
  });

  it('marks direction, safety and acknowledgement as declared', () => {
    const summary = renderSummaryTable();
    for (const tag of tags) {
      const s: MessageSpec = MESSAGES[tag];
      const row = summary.split('\n').find((l) => l.startsWith('| `' + tag + '` |'))!;
      const cells = row.split(' | ');
      expect(cells[1]).toBe(s.dir === 'd2h' ? 'device to host' : 'host to device');
      expect(cells[2]).toBe(s.safety ? 'yes' : 'no');
      expect(cells[3]).toBe(s.acked ? 'yes' : 'no');
    }
  });

  it('refuses to splice without exactly one pair of markers', () => {
    expect(spliceGenerated('no markers here').ok).toBe(false);
    expect(spliceGenerated(`${GENERATED_END}\n${GENERATED_BEGIN}`).ok).toBe(false);
    expect(spliceGenerated(`${GENERATED_BEGIN}\n${GENERATED_END}\n${GENERATED_BEGIN}\n${GENERATED_END}`).ok).toBe(false);
    const r = spliceGenerated(`head\n${GENERATED_BEGIN}\nstale\n${GENERATED_END}\ntail\n`, 'fresh\n');
    expect(r).toEqual({ ok: true, changed: true, text: `head\n${GENERATED_BEGIN}\nfresh\n${GENERATED_END}\ntail\n` });
    if (r.ok) expect(spliceGenerated(r.text, 'fresh\n')).toEqual({ ok: true, changed: false, text: r.text });
  });
});

interface WireLine {
  block: number;
  dir: Direction;
  line: string;
}

/** Lines of the ```wire blocks: "-> " host to device, "<- " device to host, "#" comments. */
function wireLines(doc: string): WireLine[] {
  const out: WireLine[] = [];
  const blocks = doc.split('```wire\n').slice(1).map((b) => b.slice(0, b.indexOf('```')));
  blocks.forEach((b, block) => {
    for (const l of b.split('\n')) {
      if (l === '' || l.startsWith('#')) continue;
      if (l.startsWith('-> ')) out.push({ block, dir: 'h2d', line: l.slice(3) });
      else if (l.startsWith('<- ')) out.push({ block, dir: 'd2h', line: l.slice(3) });
      else throw new Error(`wire block ${block}: line is neither "-> ", "<- " nor a comment: ${l}`);
    }
  });
  return out;
}

describe('example lines in PROTOCOL.md', () => {
  const doc = readDoc();
  const lines = wireLines(doc);

  it('exist, in both directions, for every message', () => {
    expect(lines.filter((l) => l.dir === 'h2d').length).toBeGreaterThan(5);
    expect(lines.filter((l) => l.dir === 'd2h').length).toBeGreaterThan(5);
    const seen = new Set(lines.map((l) => l.line.split(' ')[0]));
    for (const tag of tags.filter((t) => t !== 'CALSET')) expect(seen.has(tag), tag).toBe(true);
  });

  it('all decode, and are written exactly as the encoder writes them', () => {
    for (const l of lines) {
      const r = decodeLine(l.line, l.dir);
      expect(r.ok, `${l.line}: ${r.ok ? '' : r.detail}`).toBe(true);
      if (r.ok) expect(encodeLine(r.tag, r.seq, r.fields as never)).toBe(l.line + '\n');
    }
  });

  it('tell a consistent story: sequence numbers rise per direction, ACK/NAK answer an earlier acknowledged command', () => {
    const last = new Map<string, number>();
    const sentAcked = new Map<string, MessageTag>();
    for (const l of lines) {
      const r = decodeLine(l.line, l.dir);
      if (!r.ok) throw new Error(r.detail);
      const key = `${l.block}/${l.dir}`;
      if (l.line.startsWith('HELLO ')) last.delete(`${l.block}/h2d`); // hand-typed sessions restart
      const prev = last.get(key);
      if (prev !== undefined && !(r.tag === 'IDENT' && r.seq === 0)) expect(r.seq, l.line).toBeGreaterThan(prev);
      last.set(key, r.seq);
      if (l.dir === 'h2d' && MESSAGES[r.tag].acked) sentAcked.set(`${l.block}/${r.seq}`, r.tag);
      if (r.tag === 'ACK' || r.tag === 'NAK') expect(sentAcked.has(`${l.block}/${r.fields.ref}`), l.line).toBe(true);
    }
  });

  it('inline command examples carry correct checksums', () => {
    // Examples written in running text, such as `ARM 3*6D4C` or a printf of 'HB 0*2CE7'.
    const prose = doc.replace(/```wire\n[\s\S]*?```/g, '');
    const inline = [...prose.matchAll(/\b([A-Z]{2,6} \d+(?: [a-z]+=[^\s*`']+)*)\*([0-9A-Fa-f]{4})\b/g)];
    expect(inline.length).toBeGreaterThanOrEqual(2);
    for (const m of inline) expect(`${m[1]}*${m[2]}`).toBe(withChecksum(m[1]));
  });
});

describe('prose of PROTOCOL.md', () => {
  const doc = readDoc();

  it('quotes each named constant with its real value', () => {
    for (const [name, value] of PROTOCOL_CONSTANTS) {
      const quoted = [...doc.matchAll(new RegExp('`' + name + '`(?: - 1)? \\((\\d+)\\)', 'g'))];
      for (const m of quoted) {
        const expected = m[0].includes(' - 1') ? value - 1 : value;
        expect(Number(m[1]), m[0]).toBe(expected);
      }
    }
    expect(doc).toMatch(/`MAX_LINE_BYTES` \(\d+\)/);
    expect(doc).toMatch(/`HEARTBEAT_INTERVAL_MS` \(\d+\)/);
    expect(doc).toMatch(/`DEFAULT_HEARTBEAT_TIMEOUT_MS` \(\d+\)/);
  });

  it('quotes every host rule it names with the value the host uses (host-rules.ts), and tabulates them all', () => {
    for (const [name, value] of HOST_RULES) {
      expect(doc, name).toContain('| `' + name + '` | ' + value + ' |');
      for (const m of doc.matchAll(new RegExp('`' + name + '` \\((\\d+)\\)', 'g'))) expect(Number(m[1]), m[0]).toBe(value);
    }
    // The prose names the figures a firmware author must know, each with its value.
    for (const name of ['HANDSHAKE_TIMEOUT_MS', 'HELLO_RETRY_MS', 'ACK_TIMEOUT_MS', 'STAT_MAX_INTERVAL_MS', 'STALE_PERIODS', 'DEFAULT_BAD_LINE_BURST', 'MIN_HEARTBEAT_TIMEOUT_MS']) {
      expect(doc, name).toMatch(new RegExp('`' + name + '` \\(\\d+\\)'));
    }
  });

  it('states the CRC check value the code computes', () => {
    // CRC-16/CCITT-FALSE check value 0x29B1 (catalogue of parametrised CRC algorithms, from memory).
    expect(doc).toContain('is `29B1`');
    expect(crc16('123456789')).toBe(0x29b1);
  });

  const cc = ['cc', 'gcc'].map((c) => `/usr/bin/${c}`).find((p) => existsSync(p));
  it.skipIf(!cc)('has a C CRC function that compiles and agrees with the codec', () => {
    const m = doc.match(/```c\n([\s\S]*?)```/);
    expect(m).not.toBeNull();
    const samples = ['123456789', 'HB 1', 'THR 7 v=0.3000', 'LOG 6 level=info msg=tare done: 16 samples, offset 0.0031 N'];
    const main = [
      '#include <stdio.h>',
      '#include <string.h>',
      'int main(int argc, char **argv) {',
      '  for (int i = 1; i < argc; i++) printf("%04X\\n", crc16_ccitt_false(argv[i], strlen(argv[i])));',
      '  return 0;',
      '}',
    ].join('\n');
    const dir = mkdtempSync(join(tmpdir(), 'ductbench-crc-'));
    try {
      writeFileSync(join(dir, 'crc.c'), m![1] + '\n' + main + '\n');
      execFileSync(cc!, ['-std=c99', '-Wall', '-Werror', '-o', join(dir, 'crc'), join(dir, 'crc.c')], { timeout: 60_000 });
      const out = execFileSync(join(dir, 'crc'), samples, { timeout: 30_000, encoding: 'utf8' }).trim().split('\n');
      expect(out[0]).toBe('29B1');
      expect(out).toEqual(samples.map((s) => crc16(s).toString(16).toUpperCase().padStart(4, '0')));
    } finally {
      rmSync(dir, { recursive: true, force: true });
    }
  }, 90_000);
});
