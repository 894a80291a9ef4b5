// A byte-level fast path for the messages that arrive at telemetry rates. A board streaming TEL at 20 kHz, or
// a USB link flooding tens of thousands of lines a second, would otherwise pay for a string per line, a
// regular expression and a Number() per field, and a map look-up per key: decodeLine costs about 1.5 µs a
// line, several times what the rest of the daemon's pipeline costs.
//
// The contract is narrow on purpose: fastDecode returns a frame only for a line that decodeLine accepts, and
// then a frame equal to decodeLine's, field for field and in the same key order. Anything it is not sure of
// (an exponent, more than 15 significant digits, a bad byte, a wrong checksum, an unknown key, a message with
// non-numeric fields) returns null, and the caller hands the line to decodeLine, which gives the verdict and
// the error detail. Only the well-formed common case is fast; every error still has one source of truth.
// Both properties are checked by test/protocol-fast.test.ts against decodeLine on generated and mutated lines.

import { MAX_LINE_BYTES, MESSAGES, SEQ_MODULO, type Direction, type FieldSpec, type Frame } from './messages.js';

interface FastField {
  key: string;
  bytes: Uint8Array;
  kind: 'uint' | 'int' | 'num';
  min: number;
  max: number;
  bit: number;
}

interface FastSpec {
  tag: string;
  tagBytes: Uint8Array;
  dir: Direction;
  fields: FastField[];
  requiredMask: number;
  /** Key hash -> field index + 1; 0 for no key, -1 where two keys share a slot (then every key is compared). */
  keySlots: Int8Array;
}

const KEY_SLOTS = 1024;
/** A cheap hash of a key from its first byte, last byte and length: enough to pick the one candidate. */
const keyHash = (first: number, last: number, len: number) => (first ^ (last << 3) ^ (len << 6)) & (KEY_SLOTS - 1);

function keySlots(fields: readonly FastField[]): Int8Array {
  const slots = new Int8Array(KEY_SLOTS);
  fields.forEach((f, i) => {
    const h = keyHash(f.bytes[0], f.bytes[f.bytes.length - 1], f.bytes.length);
    slots[h] = slots[h] === 0 ? i + 1 : -1;
  });
  return slots;
}

const ascii = (s: string) => Uint8Array.from(s, (c) => c.charCodeAt(0));

/** Messages whose every field is a number, with at most 31 fields (one bit each for the duplicate check). */
const FAST_SPECS: FastSpec[] = Object.entries(MESSAGES)
  .filter(([, spec]) => spec.fields.length > 0 && spec.fields.length < 32 && spec.fields.every((f: FieldSpec) => f.kind === 'uint' || f.kind === 'int' || f.kind === 'num'))
  .map(([tag, spec]) => {
    const fields = spec.fields.map(
      (f: FieldSpec, i: number): FastField => ({
        key: f.key,
        bytes: ascii(f.key),
        kind: f.kind as FastField['kind'],
        min: f.min ?? -Infinity,
        max: f.max ?? Infinity,
        bit: 1 << i,
      }),
    );
    return { tag, tagBytes: ascii(tag), dir: spec.dir, fields, keySlots: keySlots(fields), requiredMask: spec.fields.reduce((m: number, f: FieldSpec, i: number) => (f.required ? m | (1 << i) : m), 0) };
  });

/** Tags the fast path can decode (the others always go to decodeLine). */
export const FAST_TAGS: readonly string[] = FAST_SPECS.map((s) => s.tag);

/** Exact powers of ten: for a mantissa below 2^53 and k <= 22, m / 10^k is the correctly rounded decimal. */
const POW10 = Array.from({ length: 23 }, (_, k) => 10 ** k);
/** Significant digits kept on the fast path: 10^15 < 2^53, so every such mantissa is an exact double. */
const MAX_DIGITS = 15;

function hexNibble(c: number): number {
  if (c >= 48 && c <= 57) return c - 48;
  if (c >= 65 && c <= 70) return c - 55;
  if (c >= 97 && c <= 102) return c - 87;
  return -1;
}

function sameBytes(b: Uint8Array, at: number, want: Uint8Array, len: number): boolean {
  if (want.length !== len) return false;
  for (let k = 0; k < len; k++) if (b[at + k] !== want[k]) return false;
  return true;
}

// The number parser leaves its value here and returns where it stopped: no allocation per field.
let parsed = 0;

const SPACE = 32;
const STAR = 42;

/**
 * Parses the field value starting at b[i], which runs to the next space or to `stop` (the '*'), with
 * decodeLine's grammar:
 *   uint  \d{1,10}        int  -?\d{1,10}        num  -?(\d+\.?\d*|\.\d+)   (exponents left to decodeLine)
 * Returns the index just past the value, or -1 when the text breaks the grammar or needs the slow path.
 */
function parseNumber(b: Uint8Array, i: number, stop: number, kind: FastField['kind']): number {
  let neg = false;
  if (i < stop && b[i] === 45 /* - */) {
    if (kind === 'uint') return -1;
    neg = true;
    i++;
  }
  let m = 0;
  const intStart = i;
  let d = 0;
  while (i < stop && (d = b[i] - 48) >= 0 && d <= 9) {
    m = m * 10 + d;
    i++;
  }
  const intDigits = i - intStart;
  let frac = 0;
  if (kind === 'num') {
    if (i < stop && b[i] === 46 /* . */) {
      const fracStart = ++i;
      while (i < stop && (d = b[i] - 48) >= 0 && d <= 9) {
        m = m * 10 + d;
        i++;
      }
      frac = i - fracStart;
    }
    // No digits at all ("." or "-" alone), or more than an exact double holds: decodeLine decides.
    if (intDigits + frac === 0 || intDigits + frac > MAX_DIGITS) return -1;
  } else if (intDigits === 0 || intDigits > 10) return -1;
  // The value must end at a field boundary: anything else (an exponent, a stray character) is not ours.
  if (i < stop && b[i] !== SPACE) return -1;
  const v = frac === 0 ? m : m / POW10[frac];
  parsed = neg ? -v : v;
  return i;
}

// CRC-16/CCITT-FALSE two bytes at a time: with a 16-bit register, feeding 16 bits replaces the whole register,
// so crc' = TABLE2[crc ^ (b0 << 8 | b1)], where TABLE2[x] is x advanced through 16 zero bits (128 KB, built
// once from the byte-wise table in crc.ts, so both agree by construction; test/protocol-fast.test.ts checks).
const TABLE2 = new Uint16Array(65536);
{
  for (let x = 0; x < 65536; x++) {
    let c = x;
    for (let k = 0; k < 16; k++) c = c & 0x8000 ? ((c << 1) ^ 0x1021) & 0xffff : (c << 1) & 0xffff;
    TABLE2[x] = c;
  }
}

/** CRC of b[start, end) when every byte is printable ASCII, else -1 (one pass for both checks). */
export function crcPrintable(b: Uint8Array, start: number, end: number): number {
  let crc = 0xffff;
  let bad = 0;
  let i = start;
  for (; i + 1 < end; i += 2) {
    const c0 = b[i];
    const c1 = b[i + 1];
    bad |= (c0 - 0x20) | (0x7e - c0) | (c1 - 0x20) | (0x7e - c1);
    crc = TABLE2[crc ^ ((c0 << 8) | c1)];
  }
  if (i < end) {
    const c = b[i];
    bad |= (c - 0x20) | (0x7e - c);
    // One byte left: the byte-wise step. For n < 256, TABLE2[n] is the byte table's entry for n: the first 8
    // of its 16 shifts only move n into the high byte.
    crc = ((crc << 8) & 0xffff) ^ TABLE2[((crc >> 8) ^ c) & 0xff];
  }
  return bad < 0 ? -1 : crc;
}

/**
 * Decodes b[start, end) (one line without its newline; a trailing CR is ignored), sent in direction `dir`,
 * when it is a well-formed line of an all-numeric message. Returns null for anything else: the caller then
 * asks decodeLine, which is the authority on every line this returns null for.
 */
export function fastDecode(b: Uint8Array, start: number, end: number, dir: Direction): Frame | null {
  if (end > start && b[end - 1] === 13) end--;
  const len = end - start;
  if (len < 7 || len > MAX_LINE_BYTES) return null;
  const star = end - 5;
  if (b[star] !== STAR) return null;
  // Checksum digits, then the CRC over the body with the printable-ASCII check folded into the same pass.
  const h0 = hexNibble(b[star + 1]);
  const h1 = hexNibble(b[star + 2]);
  const h2 = hexNibble(b[star + 3]);
  const h3 = hexNibble(b[star + 4]);
  if ((h0 | h1 | h2 | h3) < 0) return null;
  if (crcPrintable(b, start, star) !== ((h0 << 12) | (h1 << 8) | (h2 << 4) | h3)) return null;

  // Tag
  let sp = start;
  while (sp < star && b[sp] !== 32) sp++;
  const tagLen = sp - start;
  let spec: FastSpec | null = null;
  for (let k = 0; k < FAST_SPECS.length; k++) {
    if (sameBytes(b, start, FAST_SPECS[k].tagBytes, tagLen)) {
      spec = FAST_SPECS[k];
      break;
    }
  }
  if (spec === null || spec.dir !== dir || sp >= star) return null;

  // Sequence number
  let i = sp + 1;
  let seq = 0;
  const seqStart = i;
  while (i < star) {
    const d = b[i] - 48;
    if (d < 0 || d > 9) break;
    seq = seq * 10 + d;
    i++;
  }
  if (i === seqStart || i - seqStart > 10 || seq >= SEQ_MODULO) return null;
  if (i < star && b[i] !== 32) return null;

  // Fields, in wire order
  const fields: Record<string, number> = {};
  let seen = 0;
  const specFields = spec.fields;
  while (i < star) {
    // b[i] is the space before a field
    const keyStart = i + 1;
    let eq = keyStart;
    while (eq < star && b[eq] !== 61 /* = */ && b[eq] !== 32) eq++;
    if (eq >= star || b[eq] !== 61 || eq === keyStart) return null;
    const keyLen = eq - keyStart;
    let f: FastField | null = null;
    const slot = spec.keySlots[keyHash(b[keyStart], b[eq - 1], keyLen)];
    if (slot > 0) {
      if (sameBytes(b, keyStart, specFields[slot - 1].bytes, keyLen)) f = specFields[slot - 1];
    } else if (slot < 0) {
      for (let k = 0; k < specFields.length; k++) {
        if (sameBytes(b, keyStart, specFields[k].bytes, keyLen)) {
          f = specFields[k];
          break;
        }
      }
    }
    if (f === null || (seen & f.bit) !== 0) return null;
    const valEnd = parseNumber(b, eq + 1, star, f.kind);
    if (valEnd < 0) return null;
    const v = parsed;
    if (!(v >= f.min && v <= f.max)) return null;
    fields[f.key] = v;
    seen |= f.bit;
    i = valEnd;
  }
  if ((seen & spec.requiredMask) !== spec.requiredMask) return null;
  return { ok: true, tag: spec.tag, seq, fields } as unknown as Frame;
}
