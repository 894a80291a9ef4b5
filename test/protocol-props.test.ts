// Property tests for the protocol parsers: split anywhere, garbage anywhere, never throws, memory bounded,
// every declared message round-trips, and corrupted lines are rejected before they can be believed.

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { DECODE_ERROR_REASONS, decodeLine, encodeLine, type DecodeErrorReason } from '../firmware-protocol/src/codec.js';
import { LineSplitter } from '../firmware-protocol/src/lines.js';
import { MAX_LINE_BYTES, MESSAGES, type Direction, type FieldSpec, type MessageSpec, type MessageTag } from '../firmware-protocol/src/messages.js';

const RUNS = { numRuns: 300 };
const tags = Object.keys(MESSAGES) as MessageTag[];

function roundTo(v: number, decimals: number): number {
  const r = Number(v.toFixed(decimals));
  return Object.is(r, -0) ? 0 : r;
}

/** Values a sender may put in a field, drawn from the field's declaration (sizes kept so every line fits). */
function fieldArb(f: FieldSpec): fc.Arbitrary<unknown> {
  switch (f.kind) {
    case 'uint':
    case 'int':
      // bigInt because fc.integer stops at 2^31-1 and TEL t runs to 2^32-1.
      return fc.bigInt({ min: BigInt(f.min!), max: BigInt(f.max!) }).map(Number);
    case 'num': {
      const d = f.decimals ?? 3;
      return fc.double({ min: f.min!, max: f.max!, noNaN: true, noDefaultInfinity: true }).map((v) => roundTo(v, d));
    }
    case 'bool':
      return fc.boolean();
    case 'token':
      return fc.stringMatching(/^[A-Za-z0-9._:+\-/]{1,24}$/);
    case 'enum':
      return fc.constantFrom(...f.values!);
    case 'list':
      return fc.array(fc.stringMatching(/^[A-Za-z0-9._:+\-/@]{1,16}$/), { maxLength: 4 });
    case 'text':
      return fc.string({
        unit: fc.integer({ min: 0x20, max: 0x7e }).filter((c) => c !== 0x2a).map((c) => String.fromCharCode(c)),
        maxLength: 150,
      });
  }
}

interface AnyFrame {
  dir: Direction;
  tag: MessageTag;
  seq: number;
  fields: Record<string, unknown>;
}

const frameArb: fc.Arbitrary<AnyFrame> = fc.constantFrom(...tags).chain((tag) => {
  const spec: MessageSpec = MESSAGES[tag];
  const model = Object.fromEntries(spec.fields.map((f) => [f.key, fieldArb(f)]));
  const requiredKeys = spec.fields.filter((f) => f.required).map((f) => f.key);
  return fc
    .record({ seq: fc.integer({ min: 0, max: 65535 }), fields: fc.record(model, { requiredKeys }) })
    .map(({ seq, fields }) => ({ dir: spec.dir, tag, seq, fields: { ...(fields as Record<string, unknown>) } }));
});

function encode(f: AnyFrame): string {
  return encodeLine(f.tag, f.seq, f.fields as never);
}

const EARLY: readonly DecodeErrorReason[] = ['empty', 'too_long', 'bad_char', 'no_checksum', 'checksum'];

describe('encode -> decode', () => {
  it('round-trips every message with arbitrary in-range field values', () => {
    fc.assert(
      fc.property(frameArb, (f) => {
        const line = encode(f);
        expect(line.endsWith('\n')).toBe(true);
        expect(line.length - 1).toBeLessThanOrEqual(MAX_LINE_BYTES);
        const r = decodeLine(line.slice(0, -1), f.dir);
        expect(r).toStrictEqual({ ok: true, tag: f.tag, seq: f.seq, fields: f.fields });
        // Canonical form is a fixed point.
        if (r.ok) expect(encodeLine(r.tag, r.seq, r.fields as never)).toBe(line);
      }),
      RUNS,
    );
  });

  it('decodes a CR LF line and a lowercase checksum to the same frame', () => {
    fc.assert(
      fc.property(frameArb, (f) => {
        const line = encode(f).slice(0, -1);
        const lower = line.slice(0, -4) + line.slice(-4).toLowerCase();
        expect(decodeLine(line + '\r', f.dir)).toStrictEqual(decodeLine(line, f.dir));
        expect(decodeLine(lower, f.dir)).toStrictEqual(decodeLine(line, f.dir));
      }),
      RUNS,
    );
  });

  it('refuses the line in the other direction', () => {
    fc.assert(
      fc.property(frameArb, (f) => {
        const r = decodeLine(encode(f).slice(0, -1), f.dir === 'd2h' ? 'h2d' : 'd2h');
        expect(r.ok).toBe(false);
        if (!r.ok) expect(r.reason).toBe('wrong_direction');
      }),
      RUNS,
    );
  });
});

/** Cuts bytes at the given positions (any order, repeats allowed) into chunks, some as plain Uint8Array views. */
function chunk(bytes: Buffer, cuts: number[]): Uint8Array[] {
  const at = [...new Set(cuts.map((c) => c % (bytes.length + 1)))].sort((a, b) => a - b);
  const out: Uint8Array[] = [];
  let prev = 0;
  for (const c of [...at, bytes.length]) {
    const piece = bytes.subarray(prev, c);
    // Alternate Buffer and Uint8Array views so both input paths of push() are exercised.
    out.push(out.length % 2 ? new Uint8Array(piece.buffer, piece.byteOffset, piece.byteLength) : piece);
    prev = c;
  }
  return out;
}

describe('LineSplitter then decodeLine', () => {
  it('yields the same frames in order however the stream is chunked', () => {
    fc.assert(
      fc.property(
        fc.array(fc.tuple(frameArb, fc.boolean()), { minLength: 1, maxLength: 20 }),
        fc.array(fc.nat(), { maxLength: 40 }),
        (items, cuts) => {
          const text = items.map(([f, crlf]) => encode(f).slice(0, -1) + (crlf ? '\r\n' : '\n')).join('');
          const got: string[] = [];
          const splitter = new LineSplitter((l) => got.push(l));
          for (const c of chunk(Buffer.from(text, 'latin1'), cuts)) splitter.push(c);
          expect(splitter.buffered).toBe(0);
          expect(got).toHaveLength(items.length);
          got.forEach((line, k) => {
            const [f] = items[k];
            expect(decodeLine(line, f.dir)).toStrictEqual({ ok: true, tag: f.tag, seq: f.seq, fields: f.fields });
          });
        },
      ),
      RUNS,
    );
  });

  const garbageArb = fc.array(
    fc.oneof(
      fc.uint8Array({ maxLength: 400 }),
      // Long runs without a newline: the case that grows an uncapped reader without bound.
      fc.integer({ min: 1, max: 4000 }).chain((n) => fc.integer({ min: 0, max: 255 }).filter((b) => b !== 10).map((b) => new Uint8Array(n).fill(b))),
      fc.constant(Uint8Array.of(10)),
      fc.constant(Buffer.from('*FFFF\r\n', 'latin1')),
    ),
    { maxLength: 30 },
  );

  it('never throws on garbage, never holds more than its cap, and resynchronises on the next newline', () => {
    fc.assert(
      fc.property(garbageArb, fc.array(frameArb, { minLength: 1, maxLength: 5 }), (garbage, frames) => {
        const got: string[] = [];
        const splitter = new LineSplitter((l) => got.push(l));
        for (const g of garbage) {
          splitter.push(g);
          expect(splitter.buffered).toBeLessThanOrEqual(splitter.cap);
        }
        for (const line of got) {
          expect(line.length).toBeLessThanOrEqual(splitter.cap);
          for (const dir of ['d2h', 'h2d'] as const) {
            const r = decodeLine(line, dir);
            if (!r.ok) expect(DECODE_ERROR_REASONS).toContain(r.reason);
          }
        }
        // One newline ends whatever partial (or discarded) line the garbage left; what follows is read intact.
        splitter.push('\n');
        const before = got.length;
        splitter.push(frames.map(encode).join(''));
        const after = got.slice(before);
        expect(after).toHaveLength(frames.length);
        after.forEach((line, k) => expect(decodeLine(line, frames[k].dir)).toStrictEqual({ ok: true, tag: frames[k].tag, seq: frames[k].seq, fields: frames[k].fields }));
      }),
      RUNS,
    );
  });

  it('drops and counts every line longer than its cap instead of emitting it', () => {
    fc.assert(
      fc.property(fc.array(fc.integer({ min: 0, max: 1200 }), { minLength: 1, maxLength: 12 }), fc.array(fc.nat(), { maxLength: 20 }), (lengths, cuts) => {
        const got: string[] = [];
        const dropped: number[] = [];
        const splitter = new LineSplitter((l) => got.push(l), (n) => dropped.push(n));
        const text = lengths.map((n) => 'x'.repeat(n) + '\n').join('');
        for (const c of chunk(Buffer.from(text, 'latin1'), cuts)) {
          splitter.push(c);
          expect(splitter.buffered).toBeLessThanOrEqual(splitter.cap);
        }
        expect(got).toEqual(lengths.filter((n) => n <= splitter.cap).map((n) => 'x'.repeat(n)));
        expect(splitter.stats.overlong).toBe(lengths.filter((n) => n > splitter.cap).length);
        for (const n of dropped) expect(n).toBeGreaterThan(splitter.cap);
      }),
      RUNS,
    );
  });
});

const isHex = (c: string): boolean => /^[0-9A-Fa-f]$/.test(c);

describe('corrupted lines', () => {
  it('are rejected, at the checksum or earlier, for any single changed character', () => {
    fc.assert(
      fc.property(frameArb, fc.nat(), fc.integer({ min: 1, max: 255 }), (f, p, delta) => {
        const line = encode(f).slice(0, -1);
        const pos = p % line.length;
        const orig = line[pos];
        const repl = String.fromCharCode((orig.charCodeAt(0) + delta) % 256);
        // Changing the case of a checksum digit is not corruption: either case is accepted by design.
        fc.pre(!(pos >= line.length - 4 && isHex(repl) && repl.toUpperCase() === orig.toUpperCase()));
        const r = decodeLine(line.slice(0, pos) + repl + line.slice(pos + 1), f.dir);
        expect(r.ok).toBe(false);
        if (!r.ok) expect(EARLY).toContain(r.reason);
      }),
      RUNS,
    );
  });

  // CRC-16/CCITT-FALSE detects every burst error of up to 16 bits, every odd number of bit errors (its
  // polynomial has the factor x+1) and every two-bit error in messages far longer than ours (general CRC
  // theory, from memory). Errors are applied to the bytes the checksum covers.
  function flipBits(line: string, bits: number[]): string {
    const b = Buffer.from(line, 'latin1');
    for (const bit of bits) b[bit >> 3] ^= 0x80 >> (bit & 7); // bit 0 is the first byte's most significant bit
    return b.toString('latin1');
  }

  it('are rejected for any burst of up to 16 bits before the *', () => {
    fc.assert(
      fc.property(frameArb, fc.integer({ min: 1, max: 16 }), fc.nat(), fc.nat({ max: 0xffff }), (f, len, s, middle) => {
        const line = encode(f).slice(0, -1);
        const bodyBits = (line.length - 5) * 8;
        const start = s % (bodyBits - len + 1);
        const bits = [start];
        for (let k = 1; k < len - 1; k++) if ((middle >> k) & 1) bits.push(start + k);
        if (len > 1) bits.push(start + len - 1);
        const r = decodeLine(flipBits(line, bits), f.dir);
        expect(r.ok).toBe(false);
        if (!r.ok) expect(['bad_char', 'checksum']).toContain(r.reason);
      }),
      RUNS,
    );
  });

  it('are rejected for any one, two or three flipped bits before the *, however far apart', () => {
    fc.assert(
      fc.property(frameArb, fc.uniqueArray(fc.nat(), { minLength: 1, maxLength: 3 }), (f, picks) => {
        const line = encode(f).slice(0, -1);
        const bodyBits = (line.length - 5) * 8;
        const bits = [...new Set(picks.map((p) => p % bodyBits))];
        const r = decodeLine(flipBits(line, bits), f.dir);
        expect(r.ok).toBe(false);
        if (!r.ok) expect(['bad_char', 'checksum']).toContain(r.reason);
      }),
      RUNS,
    );
  });
});
