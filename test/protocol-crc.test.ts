// The line checksum, CRC-16/CCITT-FALSE, against its published parameters and check value and against a
// bit-by-bit reference written here from those parameters (independent of the table-driven code under test).

import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { crc16, crc16Bytes, hex4 } from '../firmware-protocol/src/crc.js';

// Parameters from the published catalogue of parametrised CRC algorithms (Greg Cook's "Catalogue of
// parametrised CRC algorithms", entry CRC-16/IBM-3740, alias CRC-16/CCITT-FALSE; from memory):
// width=16 poly=0x1021 init=0xffff refin=false refout=false xorout=0x0000 check=0x29b1 residue=0x0000.
const POLY = 0x1021;
const INIT = 0xffff;

function referenceCrc(bytes: Uint8Array): number {
  let crc = INIT;
  for (const byte of bytes) {
    for (let bit = 7; bit >= 0; bit--) {
      // Non-reflected: message bits enter most significant first.
      const inBit = (byte >> bit) & 1;
      const top = (crc >> 15) & 1;
      crc = (crc << 1) & 0xffff;
      if (top ^ inBit) crc ^= POLY;
    }
  }
  return crc; // xorout 0
}

const ascii = (s: string): Uint8Array => Uint8Array.from(s, (c) => c.charCodeAt(0));

describe('CRC-16/CCITT-FALSE', () => {
  it('gives the catalogue check value 0x29B1 for "123456789"', () => {
    // Source: catalogue entry above, check=0x29b1 (from memory).
    expect(crc16('123456789')).toBe(0x29b1);
    expect(referenceCrc(ascii('123456789'))).toBe(0x29b1);
    expect(hex4(crc16('123456789'))).toBe('29B1');
  });

  it('returns the initial value for an empty message (no final XOR)', () => {
    expect(crc16('')).toBe(INIT);
    expect(referenceCrc(new Uint8Array(0))).toBe(INIT);
  });

  it('matches values commonly published for this CRC', () => {
    // Widely quoted results for CRC-CCITT with initial value 0xFFFF (from memory): "A" -> 0xB915,
    // 256 x "A" -> 0xEA0B. Both are also recomputed by the bit-by-bit reference.
    expect(crc16('A')).toBe(0xb915);
    expect(crc16('A'.repeat(256))).toBe(0xea0b);
    expect(referenceCrc(ascii('A'))).toBe(0xb915);
    expect(referenceCrc(ascii('A'.repeat(256)))).toBe(0xea0b);
  });

  it('agrees with the bit-by-bit reference on a few protocol lines', () => {
    for (const body of ['HB 1', 'ARM 3', 'THR 5 v=0.2500', 'STAT 2 armed=1 out=0.350 fault=none hbok=1', '\x00', '\xff\xfe']) {
      expect(crc16(body), JSON.stringify(body)).toBe(referenceCrc(ascii(body)));
    }
  });

  it('agrees with the reference on arbitrary bytes, for strings and byte arrays alike', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 300 }), (bytes) => {
        const ref = referenceCrc(bytes);
        const asString = String.fromCharCode(...bytes);
        expect(crc16Bytes(bytes)).toBe(ref);
        expect(crc16(asString)).toBe(ref);
      }),
      { numRuns: 300 },
    );
  });

  it('computes over a sub-range exactly as over the slice', () => {
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 120 }), fc.nat(), fc.nat(), (bytes, a, b) => {
        const start = bytes.length === 0 ? 0 : a % (bytes.length + 1);
        const end = start + (bytes.length === 0 ? 0 : b % (bytes.length - start + 1));
        const s = String.fromCharCode(...bytes);
        expect(crc16(s, start, end)).toBe(referenceCrc(bytes.subarray(start, end)));
        expect(crc16Bytes(bytes, start, end)).toBe(referenceCrc(bytes.subarray(start, end)));
      }),
      { numRuns: 300 },
    );
  });

  it('leaves residue 0 when a message is followed by its own CRC, high byte first', () => {
    // Catalogue residue=0x0000 for this CRC (from memory): the property a receiver can use instead of comparing.
    fc.assert(
      fc.property(fc.uint8Array({ maxLength: 200 }), (bytes) => {
        const c = crc16Bytes(bytes);
        const withCrc = Uint8Array.from([...bytes, c >> 8, c & 0xff]);
        expect(crc16Bytes(withCrc)).toBe(0);
      }),
      { numRuns: 300 },
    );
  });

  it('writes four uppercase hex digits with leading zeros', () => {
    expect(hex4(0)).toBe('0000');
    expect(hex4(0x0a0b)).toBe('0A0B');
    expect(hex4(0xffff)).toBe('FFFF');
    expect(hex4(0xbeef)).toBe('BEEF');
  });
});
