#include "codec.h"

#include <math.h>
#include <stdlib.h>

#include "crc16.h"

namespace db {

namespace {

const char R0[] FW_FLASH = "ok";
const char R1[] FW_FLASH = "empty";
const char R2[] FW_FLASH = "too_long";
const char R3[] FW_FLASH = "bad_char";
const char R4[] FW_FLASH = "no_checksum";
const char R5[] FW_FLASH = "checksum";
const char R6[] FW_FLASH = "syntax";
const char R7[] FW_FLASH = "unknown_message";
const char R8[] FW_FLASH = "wrong_direction";
const char R9[] FW_FLASH = "bad_seq";
const char R10[] FW_FLASH = "unknown_field";
const char R11[] FW_FLASH = "duplicate_field";
const char R12[] FW_FLASH = "bad_field";
const char R13[] FW_FLASH = "missing_field";
const char* const RESULT_NAMES[DECODE_RESULT_COUNT] FW_FLASH = {R0, R1, R2, R3, R4, R5, R6, R7, R8, R9, R10, R11, R12, R13};

inline bool isDigit(char c) { return c >= '0' && c <= '9'; }

int hexValue(char c) {
  if (c >= '0' && c <= '9') return c - '0';
  if (c >= 'A' && c <= 'F') return c - 'A' + 10;
  if (c >= 'a' && c <= 'f') return c - 'a' + 10;
  return -1;
}

/** ^\d{1,10}$ read as an unsigned number; *overflow is set past 2^32 - 1 (beyond every v1 bound). */
bool parseUintText(const char* p, size_t n, uint32_t* value, bool* overflow) {
  if (n < 1 || n > 10) return false;
  uint32_t v = 0;
  *overflow = false;
  for (size_t i = 0; i < n; i++) {
    if (!isDigit(p[i])) return false;
    uint32_t d = (uint32_t)(p[i] - '0');
    if (v > (0xFFFFFFFFUL - d) / 10u) *overflow = true;
    v = v * 10u + d;
  }
  *value = v;
  return true;
}

/** ^-?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?$, the number syntax of codec.ts. */
bool isNumberText(const char* p, size_t n) {
  size_t i = 0;
  if (i < n && p[i] == '-') i++;
  size_t intDigits = 0;
  while (i < n && isDigit(p[i])) i++, intDigits++;
  size_t fracDigits = 0;
  if (i < n && p[i] == '.') {
    i++;
    while (i < n && isDigit(p[i])) i++, fracDigits++;
  }
  if (intDigits == 0 && fracDigits == 0) return false;
  if (i < n && (p[i] == 'e' || p[i] == 'E')) {
    i++;
    if (i < n && (p[i] == '+' || p[i] == '-')) i++;
    size_t expDigits = 0;
    while (i < n && isDigit(p[i])) i++, expDigits++;
    if (expDigits == 0) return false;
  }
  return i == n;
}

bool inRange(const FieldDef& f, double x) {
  if ((f.flags & FIELD_HAS_MIN) && x < f.min) return false;
  if ((f.flags & FIELD_HAS_MAX) && x > f.max) return false;
  return true;
}

bool parseValue(const FieldDef& f, const char* p, size_t n, FieldValue* out) {
  switch (f.kind) {
    case KIND_UINT: {
      uint32_t v;
      bool overflow;
      if (!parseUintText(p, n, &v, &overflow) || overflow || !inRange(f, (double)v)) return false;
      out->u = v;
      return true;
    }
    case KIND_INT: {
      bool neg = n > 0 && p[0] == '-';
      uint32_t v;
      bool overflow;
      if (!parseUintText(p + (neg ? 1 : 0), n - (neg ? 1 : 0), &v, &overflow) || overflow || v > 2147483647UL) return false;
      int32_t s = neg ? -(int32_t)v : (int32_t)v;
      if (!inRange(f, (double)s)) return false;
      out->i = s;
      return true;
    }
    case KIND_NUM: {
      if (!isNumberText(p, n)) return false;
      // No copy: a validated number is always followed by ' ' or '*' in the line, where strtod stops.
      char* end = nullptr;
      double x = strtod(p, &end);
      if (end != p + n) return false;
      if (isnan(x) || isinf(x) || !inRange(f, x)) return false;
      out->num = x;
      return true;
    }
    case KIND_BOOL:
      if (n != 1 || (p[0] != '0' && p[0] != '1')) return false;
      out->b = p[0] == '1';
      return true;
    case KIND_TOKEN:
      if (n < 1 || n > 64) return false;
      for (size_t i = 0; i < n; i++)
        if (!isTokenChar(p[i])) return false;
      out->s.p = p;
      out->s.n = (uint8_t)n;
      return true;
    case KIND_ENUM:
      for (uint8_t k = 0; k < f.nvalues; k++) {
        if (flashEquals(enumValue(f, k), p, n)) {
          out->e = k;
          return true;
        }
      }
      return false;
    case KIND_LIST: {
      // An empty value is an empty list; otherwise each comma-separated item is 1..64 item characters.
      size_t item = 0;
      for (size_t i = 0; i <= n; i++) {
        if (i == n || p[i] == ',') {
          if (n > 0 && (item < 1 || item > 64)) return false;
          item = 0;
        } else {
          if (!isListItemChar(p[i])) return false;
          item++;
        }
      }
      out->s.p = p;
      out->s.n = (uint8_t)n;
      return true;
    }
    case KIND_TEXT:
      // "No *": a stray asterisk would make the line look as if its checksum started early.
      for (size_t i = 0; i < n; i++)
        if (p[i] == '*') return false;
      out->s.p = p;
      out->s.n = (uint8_t)n;
      return true;
  }
  return false;
}

/** Index of the message whose tag is the n bytes at p, or MSG_COUNT. */
uint8_t findMessage(const char* p, size_t n) {
  for (uint8_t id = 0; id < MSG_COUNT; id++) {
    MsgDef m = messageDef(id);
    if (flashEquals(m.tag, p, n)) return id;
  }
  return MSG_COUNT;
}

size_t indexOf(const char* s, size_t from, size_t end, char c) {
  for (size_t i = from; i < end; i++)
    if (s[i] == c) return i;
  return (size_t)-1;
}

/** Appends to a bounded buffer; remembers overflow instead of writing past the end. */
struct Out {
  Out(char* buf, size_t size) : p(buf), cap(size) {}
  char* p;
  size_t cap;
  size_t n = 0;
  bool overflow = false;
  void ch(char c) {
    if (n < cap) p[n++] = c;
    else overflow = true;
  }
  void raw(const char* s, size_t len) {
    for (size_t i = 0; i < len; i++) ch(s[i]);
  }
  void flash(const char* s) {
    for (char c; (c = flashChar(s)) != 0; s++) ch(c);
  }
};

}  // namespace

bool isTokenChar(char c) {
  return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || isDigit(c) || c == '.' || c == '_' || c == ':' || c == '+' || c == '-' || c == '/';
}

bool isListItemChar(char c) { return isTokenChar(c) || c == '@'; }

const char* decodeResultName(DecodeResult r) {
  if (r >= DECODE_RESULT_COUNT) return nullptr;
  return (const char*)flashPtr((const void* const*)&RESULT_NAMES[r]);
}

DecodeResult decodeLine(const char* line, size_t len, uint8_t dir, Frame& out) {
  out.clear(MSG_COUNT, 0);
  if (len > 0 && line[len - 1] == '\r') len--;
  if (len == 0) return DECODE_EMPTY;
  if (len > MAX_LINE_BYTES) return DECODE_TOO_LONG;
  for (size_t i = 0; i < len; i++) {
    uint8_t c = (uint8_t)line[i];
    if (c < 0x20 || c > 0x7E) return DECODE_BAD_CHAR;
  }
  if (len < 6 || line[len - 5] != '*') return DECODE_NO_CHECKSUM;
  const size_t star = len - 5;
  uint16_t want = 0;
  for (size_t i = star + 1; i < len; i++) {
    int h = hexValue(line[i]);
    if (h < 0) return DECODE_NO_CHECKSUM;
    want = (uint16_t)((want << 4) | (uint16_t)h);
  }
  if (crc16(line, star) != want) return DECODE_CHECKSUM;

  const size_t bodyLen = star;
  size_t sp1 = indexOf(line, 0, bodyLen, ' ');
  if (sp1 == (size_t)-1 || sp1 == 0) return DECODE_SYNTAX;
  uint8_t id = findMessage(line, sp1);
  if (id == MSG_COUNT) return DECODE_UNKNOWN_MESSAGE;
  MsgDef m = messageDef(id);
  if (m.dir != dir) return DECODE_WRONG_DIRECTION;
  size_t sp2 = indexOf(line, sp1 + 1, bodyLen, ' ');
  if (sp2 == (size_t)-1) sp2 = bodyLen;
  uint32_t seq;
  bool overflow;
  if (!parseUintText(line + sp1 + 1, sp2 - sp1 - 1, &seq, &overflow) || overflow || seq >= SEQ_MODULO) return DECODE_BAD_SEQ;
  out.clear(id, (uint16_t)seq);

  size_t pos = sp2;
  while (pos < bodyLen) {
    // pos is at the space that separates fields
    size_t start = pos + 1;
    size_t eq = indexOf(line, start, bodyLen, '=');
    size_t end = indexOf(line, start, bodyLen, ' ');
    if (end == (size_t)-1) end = bodyLen;
    if (eq == (size_t)-1 || eq > end || eq == start) return DECODE_SYNTAX;
    uint8_t fi = m.nfields;
    FieldDef f;
    for (uint8_t k = 0; k < m.nfields; k++) {
      f = fieldDef(m, k);
      if (flashEquals(f.key, line + start, eq - start)) {
        fi = k;
        break;
      }
    }
    if (fi == m.nfields) return DECODE_UNKNOWN_FIELD;
    if (out.has(fi)) return DECODE_DUPLICATE_FIELD;
    if (f.kind == KIND_TEXT) end = bodyLen;  // free text runs to the end of the line
    if (!parseValue(f, line + eq + 1, end - eq - 1, &out.v[fi])) return DECODE_BAD_FIELD;
    out.present |= (uint16_t)(1u << fi);
    pos = end;
  }
  for (uint8_t k = 0; k < m.nfields; k++) {
    FieldDef f = fieldDef(m, k);
    if ((f.flags & FIELD_REQUIRED) && !out.has(k)) return DECODE_MISSING_FIELD;
  }
  return DECODE_OK;
}

size_t formatUint(uint32_t x, char* out, size_t cap) {
  char tmp[10];
  size_t n = 0;
  do {
    tmp[n++] = (char)('0' + x % 10u);
    x /= 10u;
  } while (x != 0);
  if (n > cap) return 0;
  for (size_t i = 0; i < n; i++) out[i] = tmp[n - 1 - i];
  return n;
}

size_t formatFixed(double x, uint8_t decimals, char* out, size_t cap) {
  if (isnan(x) || isinf(x) || decimals > 9) return 0;
  bool neg = x < 0;
  double scaled = (neg ? -x : x);
  for (uint8_t i = 0; i < decimals; i++) scaled *= 10.0;
  scaled = floor(scaled + 0.5);
  if (scaled >= 1.8e19) return 0;
  // Digits in 64 bits only when 32 do not suffice: 64-bit division is slow on an 8-bit controller.
  char tmp[24];
  size_t n = 0;
  if (scaled < 4294967295.0) {
    uint32_t v = (uint32_t)scaled;
    do {
      tmp[n++] = (char)('0' + v % 10u);
      v /= 10u;
    } while (v != 0);
  } else {
    uint64_t v = (uint64_t)scaled;
    do {
      tmp[n++] = (char)('0' + (int)(v % 10u));
      v /= 10u;
    } while (v != 0);
  }
  while (n <= decimals) tmp[n++] = '0';  // at least one digit before the point
  bool zero = true;
  for (size_t i = 0; i < n; i++)
    if (tmp[i] != '0') zero = false;
  Out o(out, cap);
  if (neg && !zero) o.ch('-');
  for (size_t i = n; i-- > 0;) {
    o.ch(tmp[i]);
    if (i == decimals && decimals > 0) o.ch('.');
  }
  return o.overflow ? 0 : o.n;
}

size_t encodeFrame(const Frame& f, char* out, size_t cap) {
  if (f.msg >= MSG_COUNT) return 0;
  MsgDef m = messageDef(f.msg);
  Out o(out, cap);
  o.flash(m.tag);
  o.ch(' ');
  char num[24];
  size_t k = formatUint(f.seq, num, sizeof num);
  o.raw(num, k);
  if (f.present >> m.nfields) return 0;  // a field the message does not have
  for (uint8_t i = 0; i < m.nfields; i++) {
    FieldDef d = fieldDef(m, i);
    if (!f.has(i)) {
      if (d.flags & FIELD_REQUIRED) return 0;
      continue;
    }
    o.ch(' ');
    o.flash(d.key);
    o.ch('=');
    const FieldValue& v = f.v[i];
    switch (d.kind) {
      case KIND_UINT:
        if (!inRange(d, (double)v.u)) return 0;
        k = formatUint(v.u, num, sizeof num);
        o.raw(num, k);
        break;
      case KIND_INT:
        if (!inRange(d, (double)v.i)) return 0;
        if (v.i < 0) o.ch('-');
        k = formatUint(v.i < 0 ? (uint32_t)(-(int64_t)v.i) : (uint32_t)v.i, num, sizeof num);
        o.raw(num, k);
        break;
      case KIND_NUM:
        if (isnan(v.num) || isinf(v.num) || !inRange(d, v.num)) return 0;
        k = formatFixed(v.num, d.decimals, num, sizeof num);
        if (k == 0) return 0;
        o.raw(num, k);
        break;
      case KIND_BOOL:
        o.ch(v.b ? '1' : '0');
        break;
      case KIND_ENUM:
        if (v.e >= d.nvalues) return 0;
        o.flash(enumValue(d, v.e));
        break;
      case KIND_TOKEN:
      case KIND_LIST:
      case KIND_TEXT: {
        FieldValue check;
        if (!parseValue(d, v.s.p, v.s.n, &check)) return 0;
        o.raw(v.s.p, v.s.n);
        break;
      }
    }
  }
  if (o.overflow || o.n > MAX_LINE_BYTES - 5) return 0;
  for (size_t i = 0; i < o.n; i++)
    if ((uint8_t)out[i] < 0x20 || (uint8_t)out[i] > 0x7E) return 0;  // text with control bytes
  uint16_t crc = crc16(out, o.n);
  static const char HEX[] = "0123456789ABCDEF";
  o.ch('*');
  for (int shift = 12; shift >= 0; shift -= 4) o.ch(HEX[(crc >> shift) & 15]);
  o.ch('\n');
  return o.overflow ? 0 : o.n;
}

}  // namespace db
