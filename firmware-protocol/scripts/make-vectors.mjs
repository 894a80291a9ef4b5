#!/usr/bin/env node
// Writes firmware-protocol/vectors/v1.json, the conformance vectors every implementation of protocol v1 must pass
// (the TypeScript codec in this repository, a C++ firmware later).
//
// Plain JavaScript on purpose: it runs on Node 20 without a build, and it does NOT import the codec it is meant
// to check. Checksums come from the bit-by-bit CRC below and the expected fields are written out by hand, so a
// bug in the codec cannot leak into its own test data. test/protocol-vectors.test.ts checks the codec against
// the file (and that it is exactly what this script writes); after changing a vector here run:
//   node firmware-protocol/scripts/make-vectors.mjs

import { writeFileSync } from 'node:fs';
import { dirname, join } from 'node:path';
import { fileURLToPath } from 'node:url';

/** CRC-16/CCITT-FALSE, one bit at a time: poly 0x1021, init 0xFFFF, no reflection, no final XOR. */
function crc16(text) {
  let crc = 0xffff;
  for (let i = 0; i < text.length; i++) {
    crc ^= text.charCodeAt(i) << 8;
    for (let b = 0; b < 8; b++) crc = crc & 0x8000 ? ((crc << 1) ^ 0x1021) & 0xffff : (crc << 1) & 0xffff;
  }
  return crc;
}
const hex = (n) => n.toString(16).toUpperCase().padStart(4, '0');
const sign = (body) => `${body}*${hex(crc16(body))}`;

// ------------------------------------------------------------------------------------------- valid
// c: canonical, i.e. exactly what an encoder writes for these fields (declared field order, declared decimals,
// uppercase checksum, no CR). Non-canonical lines must still decode to the same fields.
const valid = [];
function ok(direction, body, tag, seq, fields, note, opts = {}) {
  let line = sign(body);
  if (opts.lower) line = line.slice(0, -4) + line.slice(-4).toLowerCase();
  if (opts.cr) line += '\r';
  valid.push({ note, direction, line, tag, seq, fields, canonical: opts.canonical ?? true });
}

// host to device
ok('h2d', 'HELLO 0 proto=1 host=ductbench', 'HELLO', 0, { proto: 1, host: 'ductbench' }, 'handshake with optional host name');
ok('h2d', 'HELLO 0 proto=1', 'HELLO', 0, { proto: 1 }, 'handshake, optional host absent');
ok('h2d', 'HELLO 0 proto=1 host=ductbench nonce=40961', 'HELLO', 0, { proto: 1, host: 'ductbench', nonce: 40961 }, 'handshake with the nonce the answer must copy');
ok('h2d', 'HELLO 1 proto=1 nonce=0', 'HELLO', 1, { proto: 1, nonce: 0 }, 'nonce at its minimum');
ok('h2d', 'BYE 2', 'BYE', 2, {}, 'the host ends its session');
ok('h2d', 'HB 1', 'HB', 1, {}, 'heartbeat, no fields');
ok('h2d', 'HB 65535', 'HB', 65535, {}, 'largest sequence number');
ok('h2d', 'STATUS 2', 'STATUS', 2, {}, 'status request');
ok('h2d', 'ARM 3', 'ARM', 3, {}, 'arm');
ok('h2d', 'DISARM 4', 'DISARM', 4, {}, 'disarm');
ok('h2d', 'THR 5 v=0.2500', 'THR', 5, { v: 0.25 }, 'throttle, declared 4 decimals');
ok('h2d', 'THR 6 v=0.0000', 'THR', 6, { v: 0 }, 'throttle at its minimum');
ok('h2d', 'THR 7 v=1.0000', 'THR', 7, { v: 1 }, 'throttle at its maximum');
ok('h2d', 'THR 8 v=0.25', 'THR', 8, { v: 0.25 }, 'fewer decimals than declared', { canonical: false });
ok('h2d', 'THR 9 v=.5', 'THR', 9, { v: 0.5 }, 'no digit before the decimal point', { canonical: false });
ok('h2d', 'THR 10 v=1e-1', 'THR', 10, { v: 0.1 }, 'decimal exponent', { canonical: false });
ok('h2d', 'THR 10 v=1.', 'THR', 10, { v: 1 }, 'a decimal point with no digit after it', { canonical: false });
ok('h2d', 'THR 10 v=0', 'THR', 10, { v: 0 }, 'an integer for a decimal field', { canonical: false });
ok('h2d', 'THR 10 v=5E-1', 'THR', 10, { v: 0.5 }, 'capital E in the exponent', { canonical: false });
ok('h2d', 'THR 11 v=0.3500', 'THR', 11, { v: 0.35 }, 'lowercase checksum is accepted', { lower: true, canonical: false });
ok('h2d', 'STOP 12', 'STOP', 12, {}, 'emergency stop, optional why absent');
ok('h2d', 'STOP 13 why=host_trip', 'STOP', 13, { why: 'host_trip' }, 'stop naming the host trip');
ok('h2d', 'STOP 14 why=estop', 'STOP', 14, { why: 'estop' }, 'stop naming estop explicitly');
ok('h2d', 'CLEAR 15', 'CLEAR', 15, {}, 'clear a latched fault');
ok('h2d', 'TARE 16', 'TARE', 16, {}, 'tare, optional n absent');
ok('h2d', 'TARE 17 n=32', 'TARE', 17, { n: 32 }, 'tare with sample count');
ok('h2d', 'CALSET 18 ch=thrust scale=0.004905 offset=-0.012000', 'CALSET', 18, { ch: 'thrust', scale: 0.004905, offset: -0.012 }, 'calibration values');
ok('h2d', 'CALSET 19 offset=0.000000 ch=current scale=1.000000', 'CALSET', 19, { ch: 'current', scale: 1, offset: 0 }, 'fields in another order than declared', { canonical: false });
ok('h2d', 'HB 0020', 'HB', 20, {}, 'leading zeros in the sequence number', { canonical: false });
ok('h2d', 'STATUS 21', 'STATUS', 21, {}, 'line ending in CR (CR LF on the wire)', { cr: true, canonical: false });

// device to host
ok('d2h', 'IDENT 0 proto=1 fw=ductbench-fw fwver=1.0.0 caps=thrust@80,voltage@1000,current@1000 thrmax=0.800 hb=300', 'IDENT', 0,
  { proto: 1, fw: 'ductbench-fw', fwver: '1.0.0', caps: ['thrust@80', 'voltage@1000', 'current@1000'], thrmax: 0.8, hb: 300 }, 'identity, optional escrate absent');
ok('d2h', 'IDENT 0 proto=1 fw=ductbench-fw fwver=1.1.0-rc.2 caps=thrust@80,voltage@1000,current@1000,rpm@200,temp@10,torque@80 thrmax=0.650 hb=250 escrate=400', 'IDENT', 0,
  { proto: 1, fw: 'ductbench-fw', fwver: '1.1.0-rc.2', caps: ['thrust@80', 'voltage@1000', 'current@1000', 'rpm@200', 'temp@10', 'torque@80'], thrmax: 0.65, hb: 250, escrate: 400 },
  'identity with every channel and escrate');
ok('d2h', 'IDENT 0 proto=1 fw=ductbench-fw fwver=1.0.0 caps=thrust@80,voltage@100,current@100 thrmax=0.800 hb=300 escrate=400 boot=reset', 'IDENT', 0,
  { proto: 1, fw: 'ductbench-fw', fwver: '1.0.0', caps: ['thrust@80', 'voltage@100', 'current@100'], thrmax: 0.8, hb: 300, escrate: 400, boot: 'reset' }, 'the IDENT sent at boot: boot=, no nonce');
ok('d2h', 'IDENT 2 proto=1 fw=ductbench-fw fwver=1.0.0 caps=thrust@80 thrmax=0.800 hb=100 nonce=40961', 'IDENT', 2,
  { proto: 1, fw: 'ductbench-fw', fwver: '1.0.0', caps: ['thrust@80'], thrmax: 0.8, hb: 100, nonce: 40961 }, 'an answer to HELLO nonce=40961');
ok('d2h', 'TEL 3 t=1000 thrust=1e+3', 'TEL', 3, { t: 1000, thrust: 1000 }, 'exponent with a plus sign is allowed (not a leading plus)', { canonical: false });
ok('d2h', 'STAT 1 armed=0 out=0.000 fault=reset hbok=0', 'STAT', 1, { armed: false, out: 0, fault: 'reset', hbok: false }, 'status after boot: reset latched');
ok('d2h', 'STAT 2 armed=1 out=0.350 fault=none hbok=1', 'STAT', 2, { armed: true, out: 0.35, fault: 'none', hbok: true }, 'status while running');
ok('d2h', 'TEL 3 t=123456', 'TEL', 3, { t: 123456 }, 'telemetry with only the timestamp');
ok('d2h', 'TEL 4 t=4294967295 thrust=-0.0123 v=11.874 i=0.000 rpm=0 temp=-5.5 torque=0.00012 out=0.000', 'TEL', 4,
  { t: 4294967295, thrust: -0.0123, v: 11.874, i: 0, rpm: 0, temp: -5.5, torque: 0.00012, out: 0 }, 'every channel, largest timestamp');
ok('d2h', 'TEL 5 t=1000 thrust=2.4518', 'TEL', 5, { t: 1000, thrust: 2.4518 }, 'only the load cell sampled');
ok('d2h', 'TEL 6 t=2000 v=12.100 i=3.250 out=0.250', 'TEL', 6, { t: 2000, v: 12.1, i: 3.25, out: 0.25 }, 'electrical channels only');
ok('d2h', 'TEL 7 t=0 thrust=2.5 rpm=12345', 'TEL', 7, { t: 0, thrust: 2.5, rpm: 12345 }, 'fewer decimals than declared', { canonical: false });
ok('d2h', 'ACK 8 ref=5', 'ACK', 8, { ref: 5 }, 'acknowledgement');
ok('d2h', 'NAK 9 ref=6 why=above_ceiling', 'NAK', 9, { ref: 6, why: 'above_ceiling' }, 'refusal above the ceiling');
ok('d2h', 'NAK 10 ref=65535 why=not_ready', 'NAK', 10, { ref: 65535, why: 'not_ready' }, 'refusal before the handshake');
ok('d2h', 'LOG 11 level=info msg=tare done: offset 0.0132 N over 16 samples, gain=128', 'LOG', 11,
  { level: 'info', msg: 'tare done: offset 0.0132 N over 16 samples, gain=128' }, 'text with spaces, punctuation and an equals sign');
ok('d2h', 'LOG 12 level=warn msg= two  spaces kept ', 'LOG', 12, { level: 'warn', msg: ' two  spaces kept ' }, 'text keeps leading, repeated and trailing spaces');
ok('d2h', 'LOG 13 level=debug msg=', 'LOG', 13, { level: 'debug', msg: '' }, 'empty text is allowed (unlike other kinds)');

// Exactly MAX_LINE_BYTES (240) bytes, and the same with a CR, which is not counted.
const logHead = 'LOG 14 level=info msg=';
const longMsg = 'x'.repeat(240 - 5 - logHead.length);
ok('d2h', logHead + longMsg, 'LOG', 14, { level: 'info', msg: longMsg }, 'line of exactly 240 bytes');
ok('d2h', logHead + longMsg, 'LOG', 14, { level: 'info', msg: longMsg }, '240 bytes plus a CR', { cr: true, canonical: false });

// ------------------------------------------------------------------------------------------- invalid
const invalid = [];
function bad(direction, line, reason, note) {
  invalid.push({ note, direction, line, reason });
}
const badSigned = (direction, body, reason, note) => bad(direction, sign(body), reason, note);

bad('h2d', '', 'empty', 'empty line');
bad('h2d', '\r', 'empty', 'only a CR');
badSigned('d2h', logHead + longMsg + 'y', 'too_long', '241 bytes with a correct checksum');
bad('d2h', 'A'.repeat(300), 'too_long', 'long run without a checksum');
badSigned('h2d', 'THR 1\tv=0.5000', 'bad_char', 'tab character');
badSigned('d2h', 'LOG 1 level=info msg=caf\u00e9', 'bad_char', 'byte 0xE9 (not ASCII)');
badSigned('d2h', 'LOG 1 level=info msg=del\u007f', 'bad_char', 'DEL byte 0x7F');
badSigned('h2d', 'HB\u00001', 'bad_char', 'NUL byte');
badSigned('h2d', 'HB\r1', 'bad_char', 'CR inside the line');
bad('h2d', 'HB 1', 'no_checksum', 'no checksum at all');
bad('h2d', 'HB 1*12G4', 'no_checksum', 'checksum is not hex');
bad('h2d', 'HB 1*12', 'no_checksum', 'checksum too short');
bad('h2d', 'HB 1*0' + hex(crc16('HB 1')), 'no_checksum', 'checksum of five digits');
bad('h2d', '*FFFF', 'no_checksum', 'nothing before the checksum');
bad('h2d', 'ARM 3*' + hex(crc16('ARM 3') ^ 0x0001), 'checksum', 'checksum off by one bit');
bad('h2d', 'THR 5 v=0.2500*' + hex(crc16('THR 5 v=0.7500')), 'checksum', 'value changed after the checksum was computed');
badSigned('h2d', 'HB', 'syntax', 'no sequence number');
badSigned('h2d', ' HB 1', 'syntax', 'leading space');
badSigned('h2d', 'THR 1  v=0.5000', 'syntax', 'double space between fields');
badSigned('h2d', 'HB 1 ', 'syntax', 'trailing space before the checksum');
badSigned('h2d', 'THR 1 v', 'syntax', 'field without =');
badSigned('h2d', 'THR 1 =0.5000', 'syntax', 'field without a key');
badSigned('h2d', 'FOO 1', 'unknown_message', 'unknown tag');
badSigned('h2d', 'hb 1', 'unknown_message', 'tags are case-sensitive');
badSigned('h2d', 'TEL 1 t=5', 'wrong_direction', 'device message sent by the host');
badSigned('d2h', 'THR 1 v=0.5000', 'wrong_direction', 'host command sent by the device');
badSigned('h2d', 'HB 65536', 'bad_seq', 'sequence 65536 (one past the largest)');
badSigned('h2d', 'HB -1', 'bad_seq', 'negative sequence');
badSigned('h2d', 'HB 1.5', 'bad_seq', 'fractional sequence');
badSigned('h2d', 'HB  1', 'bad_seq', 'double space after the tag leaves the sequence empty');
badSigned('h2d', 'HB 0x10', 'bad_seq', 'hex sequence');
badSigned('h2d', 'HB 12345678901', 'bad_seq', 'eleven-digit sequence');
badSigned('h2d', 'THR 1 v=0.5000 x=1', 'unknown_field', 'field not declared for THR');
badSigned('h2d', 'HB 1 v=1', 'unknown_field', 'HB has no fields');
badSigned('h2d', 'THR 1 v=0.5000 v=0.6000', 'duplicate_field', 'field given twice');
badSigned('h2d', 'THR 1 v=1.5000', 'bad_field', 'throttle above 1');
badSigned('h2d', 'THR 1 v=-0.1000', 'bad_field', 'throttle below 0');
badSigned('h2d', 'THR 1 v=NaN', 'bad_field', 'NaN');
badSigned('h2d', 'THR 1 v=Infinity', 'bad_field', 'Infinity');
badSigned('h2d', 'THR 1 v=1e400', 'bad_field', 'overflows to infinity');
badSigned('h2d', 'THR 1 v=0x10', 'bad_field', 'hex-looking number');
badSigned('h2d', 'THR 1 v=+0.5', 'bad_field', 'explicit plus sign');
badSigned('h2d', 'TARE 1 n=1e+2', 'bad_field', 'an exponent in an unsigned integer');
badSigned('h2d', 'TARE 1 n=16.', 'bad_field', 'a decimal point in an unsigned integer');
badSigned('h2d', 'THR 1 v=1..', 'bad_field', 'two decimal points');
badSigned('h2d', 'THR 1 v=.', 'bad_field', 'a decimal point alone');
badSigned('h2d', 'THR 1 v=1e', 'bad_field', 'an exponent without digits');
badSigned('h2d', 'HELLO 0 proto=1 nonce=65536', 'bad_field', 'nonce above 65535');
badSigned('d2h', 'IDENT 0 proto=1 fw=x fwver=1 caps=thrust@80 thrmax=0.800 hb=300 boot=cold', 'bad_field', 'boot cause not declared');
badSigned('h2d', 'BYE 1 now=1', 'unknown_field', 'BYE has no fields');
badSigned('h2d', 'THR 1 v=0,5', 'bad_field', 'decimal comma');
badSigned('h2d', 'THR 1 v=', 'bad_field', 'empty value');
badSigned('h2d', 'TARE 1 n=0', 'bad_field', 'unsigned integer below its minimum');
badSigned('h2d', 'TARE 1 n=1.0', 'bad_field', 'decimal point in an unsigned integer');
badSigned('h2d', 'TARE 1 n=-4', 'bad_field', 'sign in an unsigned integer');
badSigned('d2h', 'TEL 1 t=4294967296', 'bad_field', 'timestamp one past 2^32-1');
badSigned('d2h', 'STAT 1 armed=2 out=0.000 fault=none hbok=1', 'bad_field', 'bool other than 0 or 1');
badSigned('d2h', 'STAT 1 armed=true out=0.000 fault=none hbok=1', 'bad_field', 'bool spelled out');
badSigned('d2h', 'STAT 1 armed=0 out=0.000 fault=NONE hbok=1', 'bad_field', 'enums are case-sensitive');
badSigned('h2d', 'STOP 1 why=brownout', 'bad_field', 'fault code STOP may not name');
badSigned('d2h', 'IDENT 0 proto=1 fw= fwver=1.0.0 caps=thrust@80 thrmax=0.800 hb=300', 'bad_field', 'empty token');
badSigned('d2h', 'IDENT 0 proto=1 fw=ductbench-fw fwver=1.0.0 caps=thrust@80,,rpm@200 thrmax=0.800 hb=300', 'bad_field', 'empty list item');
badSigned('d2h', 'IDENT 0 proto=1 fw=ductbench-fw fwver=1.0.0 caps=thrust@80 thrmax=0.800 hb=10', 'bad_field', 'heartbeat time-out below 20 ms');
badSigned('d2h', 'LOG 1 level=info msg=5*3=15', 'bad_field', 'asterisk inside text');
badSigned('d2h', 'LOG 1 level=notice msg=hi', 'bad_field', 'unknown log level');
badSigned('h2d', 'THR 1', 'missing_field', 'THR without v');
badSigned('d2h', 'NAK 2 ref=1', 'missing_field', 'NAK without why');
badSigned('d2h', 'STAT 1 armed=0 out=0.000 fault=none', 'missing_field', 'STAT without hbok');
badSigned('d2h', 'LOG 1 level=info', 'missing_field', 'LOG without msg');

const doc = {
  protocol: 1,
  about:
    'Conformance vectors for ductbench wire protocol v1. Each "line" is one line as received, without its terminating LF ' +
    '(a trailing CR, when present, is part of the vector). Every character of a line stands for one byte: its code point ' +
    'is the byte value (0..255); bytes outside printable ASCII are written as JSON \\u escapes. "direction" is d2h (device ' +
    'to host) or h2d (host to device). valid: the line decodes to tag, seq and fields (numbers as JSON numbers, bool as ' +
    'true/false, list as an array of strings); canonical is true when an encoder given those fields writes exactly this ' +
    'line. invalid: the line is rejected, and reason names the first rule it breaks, checked in this order: empty, ' +
    'too_long, bad_char, no_checksum, checksum; then the parts left to right: the "TAG SEQ" shape (syntax), the tag ' +
    '(unknown_message, wrong_direction), the sequence number (bad_seq), each field in turn (syntax, unknown_field, ' +
    'duplicate_field, bad_field); then missing_field. Generated by ' +
    'firmware-protocol/scripts/make-vectors.mjs; described in firmware-protocol/PROTOCOL.md.',
  valid,
  invalid,
};

// JSON.stringify escapes control characters but writes DEL and bytes >= 0x80 raw; escape them so the file stays
// 7-bit and every byte of a vector is visible.
const json = JSON.stringify(doc, null, 2).replace(/[\u007f-\uffff]/g, (c) => '\\u' + c.charCodeAt(0).toString(16).padStart(4, '0'));
if (process.argv.includes('--stdout')) {
  // Used by test/protocol-vectors.test.ts to prove the committed file is what this script writes.
  process.stdout.write(json + '\n');
} else {
  const out = join(dirname(fileURLToPath(import.meta.url)), '..', 'vectors', 'v1.json');
  writeFileSync(out, json + '\n');
  console.log(`wrote ${out}: ${valid.length} valid, ${invalid.length} invalid`);
}
