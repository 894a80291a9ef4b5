// Decoder and encoder for protocol v1 lines, driven by the generated table (protocol_table.cpp): the same
// rules, in the same order, as firmware-protocol/src/codec.ts, so both judge the conformance vectors alike.
// No heap, no exceptions: a decoded frame points into the caller's line buffer for its text fields.
#pragma once

#include <stddef.h>
#include <stdint.h>

#include "protocol_table.h"

namespace db {

/** Why a line was rejected, named and ordered as DecodeErrorReason in codec.ts. */
enum DecodeResult : uint8_t {
  DECODE_OK,
  DECODE_EMPTY,
  DECODE_TOO_LONG,
  DECODE_BAD_CHAR,
  DECODE_NO_CHECKSUM,
  DECODE_CHECKSUM,
  DECODE_SYNTAX,
  DECODE_UNKNOWN_MESSAGE,
  DECODE_WRONG_DIRECTION,
  DECODE_BAD_SEQ,
  DECODE_UNKNOWN_FIELD,
  DECODE_DUPLICATE_FIELD,
  DECODE_BAD_FIELD,
  DECODE_MISSING_FIELD,
  DECODE_RESULT_COUNT
};

/** Flash string naming a result as codec.ts does ("ok" for success). */
const char* decodeResultName(DecodeResult r);

struct Span {
  const char* p;
  uint8_t n;
};

union FieldValue {
  double num;   // KIND_NUM
  uint32_t u;   // KIND_UINT
  int32_t i;    // KIND_INT
  bool b;       // KIND_BOOL
  uint8_t e;    // KIND_ENUM: index into the field's values
  Span s;       // KIND_TOKEN, KIND_LIST (the raw comma-separated text), KIND_TEXT
};

struct Frame {
  uint8_t msg = MSG_COUNT;
  uint16_t seq = 0;
  uint16_t present = 0;  // bit i: field i of the message is present
  FieldValue v[MAX_FIELDS];

  bool has(uint8_t i) const { return (present >> i) & 1u; }
  void clear(uint8_t id, uint16_t s) {
    msg = id;
    seq = s;
    present = 0;
  }
  void setNum(uint8_t i, double x) { v[i].num = x, present |= (uint16_t)(1u << i); }
  void setUint(uint8_t i, uint32_t x) { v[i].u = x, present |= (uint16_t)(1u << i); }
  void setBool(uint8_t i, bool x) { v[i].b = x, present |= (uint16_t)(1u << i); }
  void setEnum(uint8_t i, uint8_t x) { v[i].e = x, present |= (uint16_t)(1u << i); }
  void setSpan(uint8_t i, const char* p, size_t n) {
    v[i].s.p = p;
    v[i].s.n = (uint8_t)n;
    present |= (uint16_t)(1u << i);
  }
};

/**
 * Decodes one line (without its LF; one trailing CR is ignored) received in direction dir. On a field error
 * (DECODE_UNKNOWN_FIELD and later) out.msg and out.seq are already filled in, so a device can answer an
 * acknowledged command with NAK bad_value.
 */
DecodeResult decodeLine(const char* line, size_t len, uint8_t dir, Frame& out);

/**
 * Encodes frame f as a complete line with checksum and LF into out (at least MAX_LINE_BYTES + 2 bytes).
 * Returns the length written including the LF, or 0 when a field breaks its rule or the line would be too long.
 */
size_t encodeFrame(const Frame& f, char* out, size_t cap);

/** Formats x with exactly `decimals` places (as JavaScript's toFixed; "-0.000" is written "0.000"). */
size_t formatFixed(double x, uint8_t decimals, char* out, size_t cap);
/** Formats an unsigned decimal. */
size_t formatUint(uint32_t x, char* out, size_t cap);

/** Syntax checks shared with the firmware (tokens in IDENT are built from configuration). */
bool isTokenChar(char c);
bool isListItemChar(char c);

}  // namespace db
