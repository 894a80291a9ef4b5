// CRC-16/CCITT-FALSE (polynomial 0x1021, initial value 0xFFFF, no reflection, no final XOR), the checksum of
// every protocol line. Chosen over an XOR byte because it catches every burst error up to 16 bits and all
// double-bit errors in lines this short, and it is a few table look-ups per byte on a small microcontroller.

const TABLE = new Uint16Array(256);
for (let n = 0; n < 256; n++) {
  let c = n << 8;
  for (let k = 0; k < 8; k++) c = c & 0x8000 ? ((c << 1) ^ 0x1021) & 0xffff : (c << 1) & 0xffff;
  TABLE[n] = c;
}

/** CRC of the character codes of s[start, end) (ASCII only; callers reject other characters first). */
export function crc16(s: string, start = 0, end = s.length): number {
  let crc = 0xffff;
  for (let i = start; i < end; i++) crc = ((crc << 8) & 0xffff) ^ TABLE[((crc >> 8) ^ s.charCodeAt(i)) & 0xff];
  return crc;
}

export function crc16Bytes(b: Uint8Array, start = 0, end = b.length): number {
  let crc = 0xffff;
  for (let i = start; i < end; i++) crc = ((crc << 8) & 0xffff) ^ TABLE[((crc >> 8) ^ b[i]) & 0xff];
  return crc;
}

const HEX = '0123456789ABCDEF';
export function hex4(n: number): string {
  return HEX[(n >> 12) & 15] + HEX[(n >> 8) & 15] + HEX[(n >> 4) & 15] + HEX[n & 15];
}
