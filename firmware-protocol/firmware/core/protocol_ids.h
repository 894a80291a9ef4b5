// GENERATED from firmware-protocol/src/messages.ts by firmware-protocol/firmware/tools/protocol-table.ts.
// Do not edit: run DUCTBENCH_WRITE_FW_TABLE=1 npx vitest run test/firmware-table.test.ts

#pragma once

#include <stdint.h>

namespace db {

constexpr uint16_t PROTOCOL_VERSION = 1;
constexpr uint16_t MAX_LINE_BYTES = 240;
constexpr uint32_t SEQ_MODULO = 65536UL;
constexpr uint16_t DEFAULT_HEARTBEAT_TIMEOUT_MS = 300;
constexpr uint16_t HEARTBEAT_INTERVAL_MS = 100;
constexpr uint8_t MAX_FIELDS = 9;

enum MsgId : uint8_t {
  MSG_IDENT,
  MSG_TEL,
  MSG_STAT,
  MSG_ACK,
  MSG_NAK,
  MSG_LOG,
  MSG_HELLO,
  MSG_HB,
  MSG_STATUS,
  MSG_ARM,
  MSG_DISARM,
  MSG_THR,
  MSG_STOP,
  MSG_BYE,
  MSG_CLEAR,
  MSG_TARE,
  MSG_CALSET,
  MSG_COUNT
};

// Field positions, in declaration order (the order an encoder writes them).
enum : uint8_t { F_IDENT_PROTO = 0, F_IDENT_FW = 1, F_IDENT_FWVER = 2, F_IDENT_CAPS = 3, F_IDENT_THRMAX = 4, F_IDENT_HB = 5, F_IDENT_ESCRATE = 6, F_IDENT_NONCE = 7, F_IDENT_BOOT = 8 };
enum : uint8_t { F_TEL_T = 0, F_TEL_THRUST = 1, F_TEL_V = 2, F_TEL_I = 3, F_TEL_RPM = 4, F_TEL_TEMP = 5, F_TEL_TORQUE = 6, F_TEL_OUT = 7 };
enum : uint8_t { F_STAT_ARMED = 0, F_STAT_OUT = 1, F_STAT_FAULT = 2, F_STAT_HBOK = 3 };
enum : uint8_t { F_ACK_REF = 0 };
enum : uint8_t { F_NAK_REF = 0, F_NAK_WHY = 1 };
enum : uint8_t { F_LOG_LEVEL = 0, F_LOG_MSG = 1 };
enum : uint8_t { F_HELLO_PROTO = 0, F_HELLO_HOST = 1, F_HELLO_NONCE = 2 };
enum : uint8_t { F_THR_V = 0 };
enum : uint8_t { F_STOP_WHY = 0 };
enum : uint8_t { F_TARE_N = 0 };
enum : uint8_t { F_CALSET_CH = 0, F_CALSET_SCALE = 1, F_CALSET_OFFSET = 2 };

enum : uint8_t { E_IDENT_BOOT_POWER = 0, E_IDENT_BOOT_RESET = 1, E_IDENT_BOOT_COUNT = 2 };
enum : uint8_t { FAULT_NONE = 0, FAULT_ESTOP = 1, FAULT_HEARTBEAT = 2, FAULT_HOST_TRIP = 3, FAULT_BROWNOUT = 4, FAULT_RESET = 5, FAULT_SENSOR = 6, FAULT_OVERCURRENT = 7, FAULT_COUNT = 8 };
enum : uint8_t { WHY_NOT_READY = 0, WHY_LATCHED = 1, WHY_NOT_ARMED = 2, WHY_THROTTLE_NOT_ZERO = 3, WHY_ABOVE_CEILING = 4, WHY_BAD_VALUE = 5, WHY_UNSUPPORTED = 6, WHY_BUSY = 7, WHY_COUNT = 8 };
enum : uint8_t { E_LOG_LEVEL_DEBUG = 0, E_LOG_LEVEL_INFO = 1, E_LOG_LEVEL_WARN = 2, E_LOG_LEVEL_ERROR = 3, E_LOG_LEVEL_COUNT = 4 };
enum : uint8_t { E_STOP_WHY_ESTOP = 0, E_STOP_WHY_HOST_TRIP = 1, E_STOP_WHY_COUNT = 2 };
enum : uint8_t { CH_THRUST = 0, CH_VOLTAGE = 1, CH_CURRENT = 2, CH_RPM = 3, CH_TEMP = 4, CH_TORQUE = 5, CH_COUNT = 6 };

}  // namespace db
