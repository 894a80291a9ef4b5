// CRC-16/CCITT-FALSE, the checksum of every protocol line (polynomial 0x1021, initial 0xFFFF, no reflection,
// no final XOR; check value 0x29B1 for "123456789"). Bitwise rather than a 256-entry table: a Uno-class board
// would give 512 bytes of flash to save a few microseconds per line.
#pragma once

#include <stddef.h>
#include <stdint.h>

namespace db {

constexpr uint16_t CRC16_INIT = 0xFFFF;

inline uint16_t crc16Update(uint16_t crc, uint8_t byte) {
  crc ^= (uint16_t)((uint16_t)byte << 8);
  for (uint8_t b = 0; b < 8; b++) crc = (crc & 0x8000) ? (uint16_t)((crc << 1) ^ 0x1021) : (uint16_t)(crc << 1);
  return crc;
}

inline uint16_t crc16(const char* s, size_t n) {
  uint16_t crc = CRC16_INIT;
  for (size_t i = 0; i < n; i++) crc = crc16Update(crc, (uint8_t)s[i]);
  return crc;
}

}  // namespace db
