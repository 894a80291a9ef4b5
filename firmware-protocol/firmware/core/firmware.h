// The bench firmware's protocol and safety logic: an explicit state machine (mode: disarmed | armed |
// latched, plus whether a host has handshaken) with one transition function, apply(), and a reason on every
// transition. It owns the ESC output and nothing else touches it. No hardware calls: everything goes through
// Hal, so the same code runs on a board, behind a pseudo-terminal and in the tests.
//
// Timing: received bytes are split and decoded as soon as poll() reads them. STOP and HB take effect right
// there, ahead of anything queued; every other command waits in a short queue that the same pass works off
// afterwards, so a STOP that arrives behind a burst of THR is carried out before any of them.
#pragma once

#include <stddef.h>
#include <stdint.h>

#include "codec.h"
#include "config.h"
#include "hal.h"
#include "line_assembler.h"
#include "telemetry.h"

#ifndef DB_QUEUE_CAP
#if defined(__AVR__)
#define DB_QUEUE_CAP 4
#else
#define DB_QUEUE_CAP 8
#endif
#endif

namespace db {

enum Mode : uint8_t { MODE_DISARMED, MODE_ARMED, MODE_LATCHED };

/** Inputs of the transition function. */
enum InputKind : uint8_t { IN_BOOT, IN_COMMAND, IN_HEARTBEAT_LOST, IN_TRIP };

struct Input {
  InputKind kind;
  uint8_t fault;         // IN_BOOT (FAULT_NONE or FAULT_RESET), IN_TRIP
  const Frame* command;  // IN_COMMAND
};

struct FirmwareStats {
  uint32_t linesIn;
  uint32_t badLines;
  uint32_t overlong;
  uint32_t linesOut;
  uint32_t telDeferred;
  uint16_t badByReason[DECODE_RESULT_COUNT];
};

class Firmware {
 public:
  Firmware(Hal& hal, const Config& cfg);

  /** (Re)starts: stop output, state from scratch, then IDENT and STAT. Call once, first thing. */
  void boot(BootCause cause);
  /** One pass of the main loop: received bytes, queued commands, sensors, watchdogs, STAT and TEL. */
  void poll();

  Mode mode() const { return mode_; }
  bool armed() const { return mode_ == MODE_ARMED; }
  bool handshaken() const { return handshaken_; }
  uint8_t fault() const { return fault_; }
  bool hbOk() const { return hbOk_; }
  /** Throttle the ESC is receiving now (0 when the line is at stop or held low). */
  double output() const { return output_; }
  double commanded() const { return commanded_; }
  /** The ESC pulse now: width in us, 0 when held low. */
  uint16_t escPulseUs() const { return escNow_; }
  bool taring() const { return tareLeft_ > 0; }
  size_t queued() const { return qLen_; }
  const FirmwareStats& stats() const { return stats_; }
  /** The IDENT caps list, e.g. "thrust@80,voltage@100,current@100". */
  const char* caps() const { return caps_; }
  /** The configuration in force (CALSET changes its calibrations). */
  const Config& config() const { return cfg_; }

 private:
  void apply(const Input& in);
  void command(const Frame& f);
  void enter(Mode to, const char* reason);
  void latch(uint8_t fault, const char* reason);
  void cut();
  void escService();

  void onLine(const char* line, size_t len);
  void badLine(DecodeResult r);
  void runQueue();

  void sampleSensors();
  void onCurrent(double amps);
  void onVoltage(double volts);
  void onThrustCounts(int32_t counts);
  void watchdogs();

  void send(Frame& f, bool isTelemetry = false);
  void ack(const Frame& cmd);
  void nak(const Frame& cmd, uint8_t why);
  void log(uint8_t level, const char* flashText);
  /** IDENT; nonce (0..65535) copied from the HELLO it answers, or -1; boot E_IDENT_BOOT_* at boot only, or -1. */
  void sendIdent(int32_t nonce, int8_t boot);
  void sendStat();
  void statIfChanged();
  void sendTel();
  uint16_t statSignature() const;
  void debug(const char* flashText, uint32_t value = 0xFFFFFFFFUL);

  Hal& hal_;
  Config cfg_;

  // ---- the state machine
  Mode mode_ = MODE_DISARMED;
  bool handshaken_ = false;
  uint8_t fault_ = FAULT_NONE;
  double commanded_ = 0;
  double output_ = 0;
  bool hbOk_ = false;
  uint32_t lastHbUs_ = 0;

  // ---- ESC line
  uint16_t escNow_ = 0xFFFF;  // nothing written yet
  uint32_t latchedAtUs_ = 0;
  bool escHeldLow_ = false;

  // ---- plumbing
  uint32_t now_ = 0;
  uint16_t txSeq_ = 0;
  LineAssembler rx_;
  Frame decoded_;
  Frame queue_[DB_QUEUE_CAP];
  uint8_t qHead_ = 0;
  uint8_t qLen_ = 0;
  char tx_[MAX_LINE_BYTES + 2];
  char text_[96];  // LOG texts are short; this is RAM on a 2 KiB board
  char caps_[56];  // longest possible: thrust@80,voltage@1000,current@1000,rpm@200,temp@50
  Frame out_;

  uint16_t lastStatSig_ = 0xFFFF;
  Periodic statClock_;
  TelemetryScheduler tel_;
  Periodic analogClock_;
  Periodic rpmClock_;
  Periodic tempClock_;

  // ---- sensors and watchdogs
  uint16_t tareLeft_ = 0;
  uint16_t tareN_ = 0;
  int64_t tareSum_ = 0;
  int32_t tareCounts_ = 0;
  uint32_t lastThrustUs_ = 0;
  bool overActive_ = false;
  uint32_t overSinceUs_ = 0;
  bool underActive_ = false;
  uint32_t underSinceUs_ = 0;
  bool rpmPrimed_ = false;
  uint32_t rpmCount_ = 0;
  uint32_t rpmEdgeUs_ = 0;
  double rpmValue_ = 0;
  bool badLogged_ = false;
  uint32_t lastBadLogUs_ = 0;

  FirmwareStats stats_ = {};
};

}  // namespace db
