// Collects received bytes into lines in a fixed buffer. A line longer than the protocol allows is dropped
// whole and the bytes up to the next newline are skipped, so a stream without newlines (noise, a wrong baud
// rate) can neither grow memory nor splice its tail onto the next good line.
#pragma once

#include <stddef.h>
#include <stdint.h>

#include "protocol_ids.h"

namespace db {

class LineAssembler {
 public:
  enum Result : uint8_t { NONE, LINE, OVERLONG };

  /** One byte in. LINE: line()/length() hold the line without its LF (a CR, if any, is kept for the decoder). */
  Result push(uint8_t b) {
    if (b == '\n') {
      if (discarding_) {
        discarding_ = false;
        len_ = 0;
        return NONE;  // the overlong line was reported when it crossed the cap
      }
      done_ = len_;
      len_ = 0;
      return LINE;
    }
    if (discarding_) return NONE;
    if (len_ >= CAP) {
      discarding_ = true;
      len_ = 0;
      return OVERLONG;
    }
    buf_[len_++] = (char)b;
    return NONE;
  }

  const char* line() const { return buf_; }
  size_t length() const { return done_; }
  /** Bytes of the partial line held now; never more than CAP. */
  size_t buffered() const { return len_; }
  void reset() {
    len_ = 0;
    done_ = 0;
    discarding_ = false;
  }

  /** Longest line kept: the protocol's cap plus one byte for a CR before the LF. */
  static constexpr size_t CAP = MAX_LINE_BYTES + 1;

 private:
  char buf_[CAP];
  size_t len_ = 0;
  size_t done_ = 0;
  bool discarding_ = false;
};

}  // namespace db
