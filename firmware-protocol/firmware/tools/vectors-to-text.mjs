// Turns the shared conformance vectors (firmware-protocol/vectors/v1.json) into a line format a few lines
// of C++ can read, so the firmware tests need no JSON parser. Strings are hex so tabs, CRs and bytes above
// 0x7F survive untouched. Usage: node vectors-to-text.mjs v1.json > vectors.txt
import { readFileSync } from 'node:fs';

const hex = (s) => Buffer.from(s, 'latin1').toString('hex') || '-';
const v = JSON.parse(readFileSync(process.argv[2], 'utf8'));
if (v.protocol !== 1) throw new Error(`vectors for protocol ${v.protocol}, firmware speaks 1`);
const out = [];
for (const t of v.valid) {
  const fields = Object.entries(t.fields).map(([k, x]) => {
    if (typeof x === 'number') return `${k} n ${String(x)}`;
    if (typeof x === 'boolean') return `${k} b ${x ? 1 : 0}`;
    if (Array.isArray(x)) return `${k} s ${hex(x.join(','))}`;
    return `${k} s ${hex(x)}`;
  });
  out.push(['V', t.direction, hex(t.line), t.tag, t.seq, t.canonical ? 1 : 0, fields.length, ...fields].join(' '));
}
for (const t of v.invalid) out.push(['I', t.direction, hex(t.line), t.reason].join(' '));
process.stdout.write(out.join('\n') + '\n');
