// Encoder and decoder for protocol v1 lines, derived entirely from the declaration in messages.ts.
//
// Line form (printable ASCII, newline-terminated):   TAG SEQ key=value key=value*CRC4
// The CRC is CRC-16/CCITT-FALSE over every character before the '*', written as four hex digits.
// The decoder never throws: garbage gives a typed error result, so a noisy cable cannot crash the daemon.

import { crc16, hex4 } from './crc.js';
import {
  MAX_LINE_BYTES,
  SEQ_MODULO,
  messageSpec,
  type Direction,
  type FieldSpec,
  type FieldsOf,
  type Frame,
  type MessageSpec,
  type MessageTag,
} from './messages.js';

export type DecodeErrorReason =
  | 'empty'
  | 'too_long'
  | 'bad_char'
  | 'no_checksum'
  | 'checksum'
  | 'syntax'
  | 'unknown_message'
  | 'wrong_direction'
  | 'bad_seq'
  | 'unknown_field'
  | 'duplicate_field'
  | 'bad_field'
  | 'missing_field';

export const DECODE_ERROR_REASONS: readonly DecodeErrorReason[] = [
  'empty',
  'too_long',
  'bad_char',
  'no_checksum',
  'checksum',
  'syntax',
  'unknown_message',
  'wrong_direction',
  'bad_seq',
  'unknown_field',
  'duplicate_field',
  'bad_field',
  'missing_field',
];

export interface DecodeError {
  ok: false;
  reason: DecodeErrorReason;
  detail: string;
}
export type DecodeResult = ({ ok: true } & Frame) | DecodeError;

const NUM_RE = /^-?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$/;
const UINT_RE = /^\d{1,10}$/;
const INT_RE = /^-?\d{1,10}$/;
const TOKEN_RE = /^[A-Za-z0-9._:+\-/]{1,64}$/;
const LIST_ITEM_RE = /^[A-Za-z0-9._:+\-/@]{1,64}$/;
const HEX_RE = /^[0-9A-Fa-f]{4}$/;

function fail(reason: DecodeErrorReason, detail: string): DecodeError {
  return { ok: false, reason, detail };
}

/** Parses one field value; returns undefined when it breaks the field's rule. */
function parseValue(f: FieldSpec, raw: string): unknown {
  switch (f.kind) {
    case 'uint':
    case 'int': {
      if (!(f.kind === 'uint' ? UINT_RE : INT_RE).test(raw)) return undefined;
      const n = Number(raw);
      return inRange(f, n) ? n : undefined;
    }
    case 'num': {
      if (!NUM_RE.test(raw)) return undefined;
      const n = Number(raw);
      return Number.isFinite(n) && inRange(f, n) ? n : undefined;
    }
    case 'bool':
      return raw === '1' ? true : raw === '0' ? false : undefined;
    case 'token':
      return TOKEN_RE.test(raw) ? raw : undefined;
    case 'enum':
      return f.values!.includes(raw) ? raw : undefined;
    case 'list': {
      if (raw === '') return [];
      const items = raw.split(',');
      for (const it of items) if (!LIST_ITEM_RE.test(it)) return undefined;
      return items;
    }
    case 'text':
      // The rule says "no *": a stray asterisk would make a line look as if its checksum started early.
      return raw.includes('*') ? undefined : raw;
  }
}

function inRange(f: FieldSpec, n: number): boolean {
  return (f.min === undefined || n >= f.min) && (f.max === undefined || n <= f.max);
}

// Field look-up tables per message, built once: the decoder is on the ingest hot path.
const fieldIndex = new Map<MessageSpec, Map<string, FieldSpec>>();
function fieldsByKey(spec: MessageSpec): Map<string, FieldSpec> {
  let m = fieldIndex.get(spec);
  if (!m) {
    m = new Map(spec.fields.map((f) => [f.key, f]));
    fieldIndex.set(spec, m);
  }
  return m;
}

/**
 * Decodes one line (without its newline; a trailing CR is ignored) sent in direction `dir`.
 * Never throws.
 */
export function decodeLine(input: string, dir: Direction): DecodeResult {
  let line = input;
  if (line.length > 0 && line.charCodeAt(line.length - 1) === 13) line = line.slice(0, -1);
  if (line.length === 0) return fail('empty', 'empty line');
  if (line.length > MAX_LINE_BYTES) return fail('too_long', `line of ${line.length} bytes exceeds ${MAX_LINE_BYTES}`);
  for (let i = 0; i < line.length; i++) {
    const c = line.charCodeAt(i);
    if (c < 0x20 || c > 0x7e) return fail('bad_char', `byte 0x${c.toString(16)} at column ${i}`);
  }
  const star = line.length - 5;
  if (star < 1 || line.charCodeAt(star) !== 42 /* '*' */) return fail('no_checksum', 'line does not end in *XXXX');
  const crcText = line.slice(star + 1);
  if (!HEX_RE.test(crcText)) return fail('no_checksum', `checksum "${crcText}" is not four hex digits`);
  const want = parseInt(crcText, 16);
  const got = crc16(line, 0, star);
  if (want !== got) return fail('checksum', `checksum ${crcText} but content gives ${hex4(got)}`);

  const body = line.slice(0, star);
  const sp1 = body.indexOf(' ');
  if (sp1 <= 0) return fail('syntax', 'expected "TAG SEQ"');
  const tag = body.slice(0, sp1);
  const spec = messageSpec(tag);
  if (!spec) return fail('unknown_message', `unknown message ${JSON.stringify(tag.slice(0, 16))}`);
  if (spec.dir !== dir) return fail('wrong_direction', `${tag} is not sent in this direction`);
  let sp2 = body.indexOf(' ', sp1 + 1);
  if (sp2 < 0) sp2 = body.length;
  const seqText = body.slice(sp1 + 1, sp2);
  if (!UINT_RE.test(seqText) || Number(seqText) >= SEQ_MODULO) return fail('bad_seq', `sequence "${seqText.slice(0, 12)}" is not 0..${SEQ_MODULO - 1}`);
  const seq = Number(seqText);

  const byKey = fieldsByKey(spec);
  const fields: Record<string, unknown> = {};
  let pos = sp2;
  while (pos < body.length) {
    // pos is at a space separating fields
    const start = pos + 1;
    const eq = body.indexOf('=', start);
    let end = body.indexOf(' ', start);
    if (end < 0) end = body.length;
    if (eq < 0 || eq > end || eq === start) return fail('syntax', `expected key=value at column ${start}`);
    const key = body.slice(start, eq);
    const f = byKey.get(key);
    if (!f) return fail('unknown_field', `${tag} has no field ${JSON.stringify(key.slice(0, 16))}`);
    if (key in fields) return fail('duplicate_field', `${tag}.${key} given twice`);
    if (f.kind === 'text') end = body.length; // free text runs to the end of the line
    const raw = body.slice(eq + 1, end);
    const v = parseValue(f, raw);
    if (v === undefined) return fail('bad_field', `${tag}.${key}=${JSON.stringify(raw.slice(0, 24))} breaks its rule (${describeRule(f)})`);
    fields[key] = v;
    pos = end;
  }
  for (const f of spec.fields) {
    if (f.required && !(f.key in fields)) return fail('missing_field', `${tag} needs ${f.key}`);
  }
  return { ok: true, tag, seq, fields } as { ok: true } & Frame;
}

/** Human description of a field's rule, used in errors and in PROTOCOL.md. */
export function describeRule(f: FieldSpec): string {
  switch (f.kind) {
    case 'uint':
    case 'int':
    case 'num': {
      const base = f.kind === 'uint' ? 'unsigned integer' : f.kind === 'int' ? 'integer' : 'decimal number';
      const range = f.min !== undefined && f.max !== undefined ? ` ${f.min}..${f.max}` : '';
      return base + range;
    }
    case 'bool':
      return '0 or 1';
    case 'token':
      return 'token of letters, digits and ._:+-/';
    case 'enum':
      return 'one of ' + f.values!.join('|');
    case 'list':
      return 'comma-separated tokens';
    case 'text':
      return 'printable text to end of line, no *';
  }
}

export class EncodeError extends Error {
  override name = 'EncodeError';
}

function formatValue(tag: string, f: FieldSpec, v: unknown): string {
  switch (f.kind) {
    case 'uint':
    case 'int':
    case 'num': {
      if (typeof v !== 'number' || !Number.isFinite(v)) throw new EncodeError(`${tag}.${f.key}: ${String(v)} is not a finite number`);
      if (!inRange(f, v)) throw new EncodeError(`${tag}.${f.key}: ${v} outside ${f.min}..${f.max}`);
      if (f.kind !== 'num') {
        if (!Number.isInteger(v)) throw new EncodeError(`${tag}.${f.key}: ${v} is not an integer`);
        return String(v);
      }
      const s = v.toFixed(f.decimals ?? 3);
      // toFixed can print "-0.000" for tiny negatives; the wire form has one zero.
      return Number(s) === 0 ? (0).toFixed(f.decimals ?? 3) : s;
    }
    case 'bool':
      if (typeof v !== 'boolean') throw new EncodeError(`${tag}.${f.key}: expected boolean`);
      return v ? '1' : '0';
    case 'list': {
      if (!Array.isArray(v)) throw new EncodeError(`${tag}.${f.key}: expected list`);
      for (const it of v) if (typeof it !== 'string' || !LIST_ITEM_RE.test(it)) throw new EncodeError(`${tag}.${f.key}: bad item ${String(it)}`);
      return v.join(',');
    }
    case 'token':
    case 'enum':
    case 'text': {
      if (typeof v !== 'string') throw new EncodeError(`${tag}.${f.key}: expected string`);
      if (parseValue(f, v) === undefined) throw new EncodeError(`${tag}.${f.key}: ${JSON.stringify(v)} breaks its rule (${describeRule(f)})`);
      if (f.kind === 'text' && !/^[\x20-\x29\x2b-\x7e]*$/.test(v)) throw new EncodeError(`${tag}.${f.key}: text must be printable ASCII without *`);
      return v;
    }
  }
}

/** Encodes one message as a complete line including its checksum and the terminating newline. Throws EncodeError on a bad value. */
export function encodeLine<M extends MessageTag>(tag: M, seq: number, fields: FieldsOf<M>): string {
  const spec = messageSpec(tag);
  if (!spec) throw new EncodeError(`unknown message ${tag}`);
  if (!Number.isInteger(seq) || seq < 0 || seq >= SEQ_MODULO) throw new EncodeError(`sequence ${seq} outside 0..${SEQ_MODULO - 1}`);
  const rec = fields as Record<string, unknown>;
  for (const k of Object.keys(rec)) {
    if (rec[k] !== undefined && !spec.fields.some((f) => f.key === k)) throw new EncodeError(`${tag} has no field ${k}`);
  }
  let body = tag + ' ' + seq;
  for (const f of spec.fields) {
    const v = rec[f.key];
    if (v === undefined) {
      if (f.required) throw new EncodeError(`${tag} needs ${f.key}`);
      continue;
    }
    body += ' ' + f.key + '=' + formatValue(tag, f, v);
  }
  if (body.length + 5 > MAX_LINE_BYTES) throw new EncodeError(`${tag} line would be ${body.length + 5} bytes, over ${MAX_LINE_BYTES}`);
  return body + '*' + hex4(crc16(body)) + '\n';
}

/** Adds the checksum to a hand-written body such as "ARM 3": for people typing into a serial terminal. */
export function withChecksum(body: string): string {
  return body + '*' + hex4(crc16(body));
}

/** Next sequence number, wrapping. */
export function nextSeq(seq: number): number {
  return (seq + 1) % SEQ_MODULO;
}

/** Number of frames missing between two consecutive sequence numbers (0 when b follows a). */
export function seqGap(prev: number, next: number): number {
  return (next - prev - 1 + SEQ_MODULO) % SEQ_MODULO;
}
