// The shared conformance vectors (firmware-protocol/vectors/v1.json, converted to text by
// tools/vectors-to-text.mjs): every valid line decodes to its fields, canonical lines re-encode byte for
// byte, every invalid line is rejected for the reason the vectors name. The firmware decodes only h2d and
// encodes only d2h, but the codec is the same table-driven code for both, so all vectors are run.

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <sstream>

#include "../core/codec.h"
#include "../core/crc16.h"
#include "check.h"

namespace {

std::string unhex(const std::string& h) {
  if (h == "-") return "";
  std::string s;
  for (size_t i = 0; i + 1 < h.size(); i += 2) s.push_back((char)std::strtol(h.substr(i, 2).c_str(), nullptr, 16));
  return s;
}

struct Expected {
  std::string key;
  char type;
  std::string value;  // number text, 0/1, or the string's bytes
};

std::string flashStr(const char* s) { return std::string(s); }

/** Compares decoded field fi of frame fr with the expectation; returns a description of a mismatch. */
std::string compareField(const db::Frame& fr, uint8_t fi, const Expected& e) {
  db::MsgDef m = db::messageDef(fr.msg);
  db::FieldDef d = db::fieldDef(m, fi);
  const db::FieldValue& v = fr.v[fi];
  switch (d.kind) {
    case db::KIND_UINT:
      return (e.type == 'n' && (double)v.u == std::strtod(e.value.c_str(), nullptr)) ? "" : "uint " + std::to_string(v.u);
    case db::KIND_INT:
      return (e.type == 'n' && (double)v.i == std::strtod(e.value.c_str(), nullptr)) ? "" : "int " + std::to_string(v.i);
    case db::KIND_NUM: {
      double want = std::strtod(e.value.c_str(), nullptr);
      return (e.type == 'n' && std::fabs(v.num - want) <= 1e-12 * std::fmax(1.0, std::fabs(want))) ? "" : "num " + std::to_string(v.num);
    }
    case db::KIND_BOOL:
      return (e.type == 'b' && (v.b ? "1" : "0") == e.value) ? "" : "bool";
    case db::KIND_ENUM:
      return (e.type == 's' && flashStr(db::enumValue(d, v.e)) == e.value) ? "" : "enum " + flashStr(db::enumValue(d, v.e));
    default:
      return (e.type == 's' && std::string(v.s.p, v.s.n) == e.value) ? "" : "text " + std::string(v.s.p, v.s.n);
  }
}

/** Field values of two frames of the same message agree (re-encoding a non-canonical line keeps its meaning). */
bool sameFields(const db::Frame& a, const db::Frame& b) {
  if (a.msg != b.msg || a.seq != b.seq || a.present != b.present) return false;
  db::MsgDef m = db::messageDef(a.msg);
  for (uint8_t i = 0; i < m.nfields; i++) {
    if (!a.has(i)) continue;
    db::FieldDef d = db::fieldDef(m, i);
    const db::FieldValue &x = a.v[i], &y = b.v[i];
    switch (d.kind) {
      case db::KIND_UINT: if (x.u != y.u) return false; break;
      case db::KIND_INT: if (x.i != y.i) return false; break;
      case db::KIND_NUM: if (std::fabs(x.num - y.num) > 1e-12 * std::fmax(1.0, std::fabs(x.num))) return false; break;
      case db::KIND_BOOL: if (x.b != y.b) return false; break;
      case db::KIND_ENUM: if (x.e != y.e) return false; break;
      default: if (std::string(x.s.p, x.s.n) != std::string(y.s.p, y.s.n)) return false;
    }
  }
  return true;
}

int g_valid = 0, g_invalid = 0;

}  // namespace

int conformanceVectorsRun() { return g_valid + g_invalid; }

TEST_CASE("conformance vectors: valid lines decode, canonical ones re-encode exactly; invalid ones fail for the named reason") {
  const char* path = std::getenv("DB_VECTORS");
  CHECK(path != nullptr);
  if (!path) return;
  std::ifstream in(path);
  CHECK(in.good());
  std::string row;
  while (std::getline(in, row)) {
    std::istringstream s(row);
    std::string kind, dirText, lineHex;
    s >> kind >> dirText >> lineHex;
    uint8_t dir = dirText == "d2h" ? db::DIR_D2H : db::DIR_H2D;
    std::string line = unhex(lineHex);
    db::Frame fr;
    db::DecodeResult r = db::decodeLine(line.data(), line.size(), dir, fr);
    if (kind == "I") {
      std::string reason;
      s >> reason;
      g_invalid++;
      std::string got = r == db::DECODE_OK ? "ok" : flashStr(db::decodeResultName(r));
      if (got != reason) t::fail(__FILE__, __LINE__, "invalid vector " + lineHex.substr(0, 60) + ": want " + reason + ", got " + got);
      continue;
    }
    std::string tag;
    unsigned seq, canonical, n;
    s >> tag >> seq >> canonical >> n;
    g_valid++;
    if (r != db::DECODE_OK) {
      t::fail(__FILE__, __LINE__, "valid vector rejected (" + flashStr(db::decodeResultName(r)) + "): " + line);
      continue;
    }
    CHECK_EQ(flashStr(db::messageDef(fr.msg).tag), tag);
    CHECK_EQ((unsigned)fr.seq, seq);
    uint16_t seen = 0;
    for (unsigned k = 0; k < n; k++) {
      Expected e;
      std::string val;
      s >> e.key >> e.type >> val;
      e.value = e.type == 's' ? unhex(val) : val;
      db::MsgDef m = db::messageDef(fr.msg);
      uint8_t fi = m.nfields;
      for (uint8_t i = 0; i < m.nfields; i++)
        if (flashStr(db::fieldDef(m, i).key) == e.key) fi = i;
      if (fi == m.nfields || !fr.has(fi)) {
        t::fail(__FILE__, __LINE__, "field " + e.key + " missing after decoding " + line);
        continue;
      }
      seen |= (uint16_t)(1u << fi);
      std::string diff = compareField(fr, fi, e);
      if (!diff.empty()) t::fail(__FILE__, __LINE__, "field " + e.key + " of " + line + " decoded as " + diff + ", want " + e.value);
    }
    CHECK_EQ(fr.present, seen);  // nothing decoded that the vector does not list
    char out[db::MAX_LINE_BYTES + 2];
    size_t len = db::encodeFrame(fr, out, sizeof out);
    CHECK(len > 0);
    std::string enc(out, len);
    if (canonical) {
      if (enc != line + "\n") t::fail(__FILE__, __LINE__, "canonical re-encoding differs: " + enc + " vs " + line);
    } else {
      db::Frame again;
      CHECK_EQ((int)db::decodeLine(out, len - 1, dir, again), (int)db::DECODE_OK);
      CHECK(sameFields(fr, again));
    }
    // The same line in the other direction is refused as such.
    db::Frame other;
    CHECK_EQ((int)db::decodeLine(line.data(), line.size(), dir == db::DIR_D2H ? db::DIR_H2D : db::DIR_D2H, other), (int)db::DECODE_WRONG_DIRECTION);
  }
  CHECK(g_valid >= 40);  // v1.json holds 41 valid and 61 invalid lines; a short read must not pass
  CHECK(g_invalid >= 60);
  std::printf("  vectors: %d valid, %d invalid\n", g_valid, g_invalid);
}

TEST_CASE("CRC-16/CCITT-FALSE check value") {
  // The catalogued check value of CRC-16/CCITT-FALSE for "123456789" is 0x29B1 (PROTOCOL.md; common practice).
  CHECK_EQ(db::crc16("123456789", 9), (uint16_t)0x29B1);
}

TEST_CASE("formatFixed writes the declared decimals like toFixed, with one zero for tiny negatives") {
  char b[32];
  auto f = [&](double x, uint8_t d) { return std::string(b, db::formatFixed(x, d, b, sizeof b)); };
  CHECK_EQ(f(0.25, 4), std::string("0.2500"));
  CHECK_EQ(f(-0.0123, 4), std::string("-0.0123"));
  CHECK_EQ(f(-0.00001, 3), std::string("0.000"));
  CHECK_EQ(f(12345, 0), std::string("12345"));
  CHECK_EQ(f(0.00012, 5), std::string("0.00012"));
  CHECK_EQ(f(1e9, 6), std::string("1000000000.000000"));
  CHECK_EQ(f(0.9996, 3), std::string("1.000"));
}
