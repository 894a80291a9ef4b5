// The few things that differ between the boards the core runs on, kept in one place so the protocol and
// safety code stays free of #ifdefs. On AVR, constant data must be asked for by address space (PROGMEM):
// its 2 KiB of RAM cannot hold the protocol table and the log texts. Everywhere else const data already
// lives in flash and these helpers are plain memory reads.
//
// Only C headers: the AVR toolchain has no C++ standard library.
#pragma once

#include <stddef.h>
#include <stdint.h>
#include <string.h>

#if defined(__AVR__)
#include <avr/pgmspace.h>
#define FW_FLASH PROGMEM
/** A string literal kept in flash (AVR) or ordinary constant memory (elsewhere). */
#define FW_STR(s) (PSTR(s))
namespace db {
inline void flashCopy(void* dst, const void* src, size_t n) { memcpy_P(dst, src, n); }
inline char flashChar(const char* p) { return (char)pgm_read_byte(p); }
inline const void* flashPtr(const void* const* p) { return (const void*)pgm_read_word(p); }
}  // namespace db
#else
#define FW_FLASH
#define FW_STR(s) (s)
namespace db {
inline void flashCopy(void* dst, const void* src, size_t n) { memcpy(dst, src, n); }
inline char flashChar(const char* p) { return *p; }
inline const void* flashPtr(const void* const* p) { return *p; }
}  // namespace db
#endif

namespace db {

/** Length of a flash string. */
inline size_t flashLen(const char* s) {
  size_t n = 0;
  while (flashChar(s + n) != 0) n++;
  return n;
}

/** True when the flash string s equals the n bytes at p exactly. */
inline bool flashEquals(const char* s, const char* p, size_t n) {
  for (size_t i = 0; i < n; i++) {
    char c = flashChar(s + i);
    if (c == 0 || c != p[i]) return false;
  }
  return flashChar(s + n) == 0;
}

}  // namespace db
