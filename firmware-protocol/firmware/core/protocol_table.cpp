// GENERATED from firmware-protocol/src/messages.ts by firmware-protocol/firmware/tools/protocol-table.ts.
// Do not edit: run DUCTBENCH_WRITE_FW_TABLE=1 npx vitest run test/firmware-table.test.ts

#include "protocol_table.h"

namespace db {

static const char S0[] FW_FLASH = "IDENT";
static const char S1[] FW_FLASH = "proto";
static const char S2[] FW_FLASH = "fw";
static const char S3[] FW_FLASH = "fwver";
static const char S4[] FW_FLASH = "caps";
static const char S5[] FW_FLASH = "thrmax";
static const char S6[] FW_FLASH = "hb";
static const char S7[] FW_FLASH = "escrate";
static const char S8[] FW_FLASH = "nonce";
static const char S9[] FW_FLASH = "boot";
static const char S10[] FW_FLASH = "TEL";
static const char S11[] FW_FLASH = "t";
static const char S12[] FW_FLASH = "thrust";
static const char S13[] FW_FLASH = "v";
static const char S14[] FW_FLASH = "i";
static const char S15[] FW_FLASH = "rpm";
static const char S16[] FW_FLASH = "temp";
static const char S17[] FW_FLASH = "torque";
static const char S18[] FW_FLASH = "out";
static const char S19[] FW_FLASH = "STAT";
static const char S20[] FW_FLASH = "armed";
static const char S21[] FW_FLASH = "fault";
static const char S22[] FW_FLASH = "hbok";
static const char S23[] FW_FLASH = "ACK";
static const char S24[] FW_FLASH = "ref";
static const char S25[] FW_FLASH = "NAK";
static const char S26[] FW_FLASH = "why";
static const char S27[] FW_FLASH = "LOG";
static const char S28[] FW_FLASH = "level";
static const char S29[] FW_FLASH = "msg";
static const char S30[] FW_FLASH = "HELLO";
static const char S31[] FW_FLASH = "host";
static const char S32[] FW_FLASH = "HB";
static const char S33[] FW_FLASH = "STATUS";
static const char S34[] FW_FLASH = "ARM";
static const char S35[] FW_FLASH = "DISARM";
static const char S36[] FW_FLASH = "THR";
static const char S37[] FW_FLASH = "STOP";
static const char S38[] FW_FLASH = "BYE";
static const char S39[] FW_FLASH = "CLEAR";
static const char S40[] FW_FLASH = "TARE";
static const char S41[] FW_FLASH = "n";
static const char S42[] FW_FLASH = "CALSET";
static const char S43[] FW_FLASH = "ch";
static const char S44[] FW_FLASH = "scale";
static const char S45[] FW_FLASH = "offset";
static const char S46[] FW_FLASH = "power";
static const char S47[] FW_FLASH = "reset";
static const char S48[] FW_FLASH = "none";
static const char S49[] FW_FLASH = "estop";
static const char S50[] FW_FLASH = "heartbeat";
static const char S51[] FW_FLASH = "host_trip";
static const char S52[] FW_FLASH = "brownout";
static const char S53[] FW_FLASH = "sensor";
static const char S54[] FW_FLASH = "overcurrent";
static const char S55[] FW_FLASH = "not_ready";
static const char S56[] FW_FLASH = "latched";
static const char S57[] FW_FLASH = "not_armed";
static const char S58[] FW_FLASH = "throttle_not_zero";
static const char S59[] FW_FLASH = "above_ceiling";
static const char S60[] FW_FLASH = "bad_value";
static const char S61[] FW_FLASH = "unsupported";
static const char S62[] FW_FLASH = "busy";
static const char S63[] FW_FLASH = "debug";
static const char S64[] FW_FLASH = "info";
static const char S65[] FW_FLASH = "warn";
static const char S66[] FW_FLASH = "error";
static const char S67[] FW_FLASH = "voltage";
static const char S68[] FW_FLASH = "current";

static const char* const V_E_IDENT_BOOT[] FW_FLASH = {S46, S47};
static const char* const V_FAULT[] FW_FLASH = {S48, S49, S50, S51, S52, S47, S53, S54};
static const char* const V_WHY[] FW_FLASH = {S55, S56, S57, S58, S59, S60, S61, S62};
static const char* const V_E_LOG_LEVEL[] FW_FLASH = {S63, S64, S65, S66};
static const char* const V_E_STOP_WHY[] FW_FLASH = {S49, S51};
static const char* const V_CH[] FW_FLASH = {S12, S67, S68, S15, S16, S17};

static const FieldDef FIELDS_IDENT[] FW_FLASH = {
  {S1, KIND_UINT, 0, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 999.0},
  {S2, KIND_TOKEN, 0, FIELD_REQUIRED, 0, nullptr, 0.0, 0.0},
  {S3, KIND_TOKEN, 0, FIELD_REQUIRED, 0, nullptr, 0.0, 0.0},
  {S4, KIND_LIST, 0, FIELD_REQUIRED, 0, nullptr, 0.0, 0.0},
  {S5, KIND_NUM, 3, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 1.0},
  {S6, KIND_UINT, 0, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 20.0, 5000.0},
  {S7, KIND_UINT, 0, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 1.0, 2000.0},
  {S8, KIND_UINT, 0, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 65535.0},
  {S9, KIND_ENUM, 0, 0, 2, V_E_IDENT_BOOT, 0.0, 0.0},
};
static const FieldDef FIELDS_TEL[] FW_FLASH = {
  {S11, KIND_UINT, 0, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 4294967295.0},
  {S12, KIND_NUM, 4, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -10000.0, 10000.0},
  {S13, KIND_NUM, 3, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -1000.0, 1000.0},
  {S14, KIND_NUM, 3, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -1000.0, 1000.0},
  {S15, KIND_NUM, 0, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 1000000.0},
  {S16, KIND_NUM, 1, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -100.0, 500.0},
  {S17, KIND_NUM, 5, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -1000.0, 1000.0},
  {S18, KIND_NUM, 3, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 1.0},
};
static const FieldDef FIELDS_STAT[] FW_FLASH = {
  {S20, KIND_BOOL, 0, FIELD_REQUIRED, 0, nullptr, 0.0, 0.0},
  {S18, KIND_NUM, 3, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 1.0},
  {S21, KIND_ENUM, 0, FIELD_REQUIRED, 8, V_FAULT, 0.0, 0.0},
  {S22, KIND_BOOL, 0, FIELD_REQUIRED, 0, nullptr, 0.0, 0.0},
};
static const FieldDef FIELDS_ACK[] FW_FLASH = {
  {S24, KIND_UINT, 0, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 65535.0},
};
static const FieldDef FIELDS_NAK[] FW_FLASH = {
  {S24, KIND_UINT, 0, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 65535.0},
  {S26, KIND_ENUM, 0, FIELD_REQUIRED, 8, V_WHY, 0.0, 0.0},
};
static const FieldDef FIELDS_LOG[] FW_FLASH = {
  {S28, KIND_ENUM, 0, FIELD_REQUIRED, 4, V_E_LOG_LEVEL, 0.0, 0.0},
  {S29, KIND_TEXT, 0, FIELD_REQUIRED, 0, nullptr, 0.0, 0.0},
};
static const FieldDef FIELDS_HELLO[] FW_FLASH = {
  {S1, KIND_UINT, 0, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 999.0},
  {S31, KIND_TOKEN, 0, 0, 0, nullptr, 0.0, 0.0},
  {S8, KIND_UINT, 0, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 65535.0},
};
static const FieldDef FIELDS_THR[] FW_FLASH = {
  {S13, KIND_NUM, 4, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 0.0, 1.0},
};
static const FieldDef FIELDS_STOP[] FW_FLASH = {
  {S26, KIND_ENUM, 0, 0, 2, V_E_STOP_WHY, 0.0, 0.0},
};
static const FieldDef FIELDS_TARE[] FW_FLASH = {
  {S41, KIND_UINT, 0, FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, 1.0, 1000.0},
};
static const FieldDef FIELDS_CALSET[] FW_FLASH = {
  {S43, KIND_ENUM, 0, FIELD_REQUIRED, 6, V_CH, 0.0, 0.0},
  {S44, KIND_NUM, 6, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -1000000000.0, 1000000000.0},
  {S45, KIND_NUM, 6, FIELD_REQUIRED | FIELD_HAS_MIN | FIELD_HAS_MAX, 0, nullptr, -1000000000.0, 1000000000.0},
};

const MsgDef MESSAGE_TABLE[MSG_COUNT] FW_FLASH = {
  {S0, DIR_D2H, false, false, 9, FIELDS_IDENT},
  {S10, DIR_D2H, false, true, 8, FIELDS_TEL},
  {S19, DIR_D2H, false, true, 4, FIELDS_STAT},
  {S23, DIR_D2H, false, true, 1, FIELDS_ACK},
  {S25, DIR_D2H, false, true, 2, FIELDS_NAK},
  {S27, DIR_D2H, false, false, 2, FIELDS_LOG},
  {S30, DIR_H2D, false, false, 3, FIELDS_HELLO},
  {S32, DIR_H2D, false, true, 0, nullptr},
  {S33, DIR_H2D, false, false, 0, nullptr},
  {S34, DIR_H2D, true, true, 0, nullptr},
  {S35, DIR_H2D, true, true, 0, nullptr},
  {S36, DIR_H2D, true, true, 1, FIELDS_THR},
  {S37, DIR_H2D, true, true, 1, FIELDS_STOP},
  {S38, DIR_H2D, true, true, 0, nullptr},
  {S39, DIR_H2D, true, true, 0, nullptr},
  {S40, DIR_H2D, true, false, 1, FIELDS_TARE},
  {S42, DIR_H2D, true, false, 3, FIELDS_CALSET},
};

}  // namespace db
