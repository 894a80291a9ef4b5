// The conformance vectors (firmware-protocol/vectors/v1.json) against the TypeScript codec. The vectors are
// written by firmware-protocol/scripts/make-vectors.mjs with its own bit-by-bit CRC and hand-written fields,
// never by this codec, so agreement here is a real check and not the codec agreeing with itself.

import { execFileSync } from 'node:child_process';
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { describe, expect, it } from 'vitest';
import { DECODE_ERROR_REASONS, decodeLine, encodeLine, type DecodeErrorReason } from '../firmware-protocol/src/codec.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import { MESSAGES, PROTOCOL_VERSION, type Direction, type MessageSpec, type MessageTag } from '../firmware-protocol/src/messages.js';

interface ValidVector {
  note: string;
  direction: Direction;
  line: string;
  tag: MessageTag;
  seq: number;
  fields: Record<string, unknown>;
  canonical: boolean;
}
interface InvalidVector {
  note: string;
  direction: Direction;
  line: string;
  reason: DecodeErrorReason;
}

const file = new URL('../firmware-protocol/vectors/v1.json', import.meta.url);
const raw = readFileSync(file);
const vectors = JSON.parse(raw.toString('utf8')) as { protocol: number; valid: ValidVector[]; invalid: InvalidVector[] };

describe('vector file', () => {
  it('is for this protocol version', () => {
    expect(vectors.protocol).toBe(PROTOCOL_VERSION);
  });

  it('is 7-bit printable text, so every unusual byte of a vector shows as a JSON escape', () => {
    for (const b of raw) expect(b === 10 || (b >= 0x20 && b <= 0x7e)).toBe(true);
  });

  it('is exactly what its generator writes (nobody edited it by hand)', () => {
    const script = fileURLToPath(new URL('../firmware-protocol/scripts/make-vectors.mjs', import.meta.url));
    const fresh = execFileSync(process.execPath, [script, '--stdout'], { encoding: 'utf8', timeout: 60_000 });
    expect(fresh).toBe(raw.toString('utf8'));
  });

  it('holds only byte-valued characters', () => {
    for (const v of [...vectors.valid, ...vectors.invalid]) {
      for (let i = 0; i < v.line.length; i++) expect(v.line.charCodeAt(i)).toBeLessThan(256);
    }
  });
});

describe('valid vectors', () => {
  it.each(vectors.valid.map((v) => [`${v.direction} ${v.note}`, v] as const))('%s', (_name, v) => {
    const r = decodeLine(v.line, v.direction);
    expect(r).toStrictEqual({ ok: true, tag: v.tag, seq: v.seq, fields: v.fields });
  });

  it.each(vectors.valid.map((v) => [`${v.canonical ? 'canonical' : 'non-canonical'}: ${v.note}`, v] as const))(
    're-encodes to the same line exactly when marked canonical (%s)',
    (_name, v) => {
      const again = encodeLine(v.tag, v.seq, v.fields as never);
      if (v.canonical) expect(again).toBe(v.line + '\n');
      else expect(again).not.toBe(v.line + '\n');
      // Whatever the formatting, the canonical re-encoding decodes to the same frame.
      expect(decodeLine(again.slice(0, -1), v.direction)).toStrictEqual({ ok: true, tag: v.tag, seq: v.seq, fields: v.fields });
    },
  );

  it('survive the line splitter unchanged, one byte at a time', () => {
    const got: string[] = [];
    const splitter = new LineSplitter((l) => got.push(l));
    const stream = Buffer.from(vectors.valid.map((v) => v.line + '\n').join(''), 'latin1');
    for (let i = 0; i < stream.length; i++) splitter.push(stream.subarray(i, i + 1));
    expect(got).toEqual(vectors.valid.map((v) => v.line));
    expect(splitter.stats.overlong).toBe(0);
  });

  it('cover every message, and every optional field both present and absent', () => {
    for (const [tag, spec] of Object.entries(MESSAGES) as [MessageTag, MessageSpec][]) {
      const mine = vectors.valid.filter((v) => v.tag === tag);
      expect(mine.length, tag).toBeGreaterThan(0);
      for (const v of mine) expect(v.direction, tag).toBe(spec.dir);
      for (const f of spec.fields.filter((x) => !x.required)) {
        expect(mine.some((v) => f.key in v.fields), `${tag}.${f.key} present`).toBe(true);
        expect(mine.some((v) => !(f.key in v.fields)), `${tag}.${f.key} absent`).toBe(true);
      }
    }
  });

  it('include the formatting edge cases', () => {
    const lines = vectors.valid.map((v) => v.line);
    expect(lines.some((l) => /\*[0-9a-f]{4}$/.test(l) && /[a-f]/.test(l.slice(-4))), 'lowercase checksum').toBe(true);
    expect(lines.some((l) => l.endsWith('\r')), 'CR-terminated').toBe(true);
    expect(lines.some((l) => l.length === 240), 'exactly MAX_LINE_BYTES').toBe(true);
    expect(vectors.valid.some((v) => typeof v.fields.msg === 'string' && v.fields.msg.includes(' ')), 'text with spaces').toBe(true);
    expect(vectors.valid.some((v) => v.canonical)).toBe(true);
    expect(vectors.valid.some((v) => !v.canonical)).toBe(true);
  });
});

describe('invalid vectors', () => {
  it.each(vectors.invalid.map((v) => [`${v.reason}: ${v.note}`, v] as const))('%s', (_name, v) => {
    const r = decodeLine(v.line, v.direction);
    expect(r.ok).toBe(false);
    if (!r.ok) {
      expect(r.reason).toBe(v.reason);
      expect(r.detail.length).toBeGreaterThan(0);
    }
  });

  it('cover every decoder reason', () => {
    const seen = new Set(vectors.invalid.map((v) => v.reason));
    for (const reason of DECODE_ERROR_REASONS) expect(seen.has(reason), reason).toBe(true);
    for (const v of vectors.invalid) expect(DECODE_ERROR_REASONS).toContain(v.reason);
  });

  it('include the sequence and number forms people get wrong', () => {
    const has = (reason: DecodeErrorReason, part: string): boolean => vectors.invalid.some((v) => v.reason === reason && v.line.includes(part));
    expect(has('bad_seq', 'HB 65536*')).toBe(true);
    expect(has('bad_seq', 'HB -1*')).toBe(true);
    expect(has('bad_seq', 'HB 1.5*')).toBe(true);
    expect(has('bad_field', '=NaN*')).toBe(true);
    expect(has('bad_field', '=Infinity*')).toBe(true);
    expect(has('bad_field', '=0x10*')).toBe(true);
    expect(has('bad_field', ' v=*')).toBe(true);
    expect(has('syntax', '  ')).toBe(true);
  });
});
