// Shapes of the protocol table. The table itself (protocol_table.cpp) and the ids (protocol_ids.h) are
// generated from firmware-protocol/src/messages.ts; this header is the hand-written part they fill in.
#pragma once

#include "portable.h"
#include "protocol_ids.h"

namespace db {

enum Kind : uint8_t { KIND_UINT, KIND_INT, KIND_NUM, KIND_BOOL, KIND_TOKEN, KIND_ENUM, KIND_LIST, KIND_TEXT };
enum Dir : uint8_t { DIR_D2H, DIR_H2D };
enum : uint8_t { FIELD_REQUIRED = 1, FIELD_HAS_MIN = 2, FIELD_HAS_MAX = 4 };

struct FieldDef {
  const char* key;  // flash string
  uint8_t kind;
  uint8_t decimals;
  uint8_t flags;
  uint8_t nvalues;
  const char* const* values;  // flash array of flash strings, for KIND_ENUM
  double min;  // float on AVR, where double is 32 bits; every v1 bound is an integer and fits
  double max;
};

struct MsgDef {
  const char* tag;  // flash string
  uint8_t dir;
  bool acked;
  bool safety;
  uint8_t nfields;
  const FieldDef* fields;  // flash array
};

extern const MsgDef MESSAGE_TABLE[MSG_COUNT];

/** RAM copies of table rows (the table may sit in another address space). */
inline MsgDef messageDef(uint8_t id) {
  MsgDef m;
  flashCopy(&m, &MESSAGE_TABLE[id], sizeof m);
  return m;
}
inline FieldDef fieldDef(const MsgDef& m, uint8_t i) {
  FieldDef f;
  flashCopy(&f, &m.fields[i], sizeof f);
  return f;
}
inline const char* enumValue(const FieldDef& f, uint8_t i) { return (const char*)flashPtr((const void* const*)&f.values[i]); }

}  // namespace db
