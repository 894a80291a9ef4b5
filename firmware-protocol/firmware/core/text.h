// A bounded text builder for LOG lines and debug output: no printf (AVR's has no floating point) and no heap.
// Text that does not fit is cut, never written past the buffer.
#pragma once

#include <stddef.h>
#include <stdint.h>

#include "codec.h"
#include "portable.h"

namespace db {

class Text {
 public:
  Text(char* buf, size_t cap) : p_(buf), cap_(cap) {
    if (cap_ > 0) p_[0] = 0;
  }
  Text& ch(char c) {
    if (n_ + 1 < cap_) {
      p_[n_++] = c;
      p_[n_] = 0;
    }
    return *this;
  }
  /** A flash string (FW_STR). */
  Text& str(const char* s) {
    for (char c; s && (c = flashChar(s)) != 0; s++) ch(c);
    return *this;
  }
  Text& ram(const char* s) {
    for (; s && *s; s++) ch(*s);
    return *this;
  }
  Text& u(uint32_t x) {
    char t[12];
    size_t k = formatUint(x, t, sizeof t);
    for (size_t i = 0; i < k; i++) ch(t[i]);
    return *this;
  }
  Text& fixed(double x, uint8_t decimals) {
    char t[24];
    size_t k = formatFixed(x, decimals, t, sizeof t);
    for (size_t i = 0; i < k; i++) ch(t[i]);
    return *this;
  }
  const char* c_str() const { return p_; }
  size_t size() const { return n_; }

 private:
  char* p_;
  size_t cap_;
  size_t n_ = 0;
};

}  // namespace db
