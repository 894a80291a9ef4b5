#include "firmware.h"

#include <math.h>

#include "sensors.h"
#include "text.h"

#ifndef DB_DEBUG_TEXT
#if defined(__AVR__)
#define DB_DEBUG_TEXT 0  // no second port to show it on, and no RAM to spare
#else
#define DB_DEBUG_TEXT 1
#endif
#endif

namespace db {

namespace {

constexpr uint16_t DEFAULT_TARE_SAMPLES = 16;
constexpr size_t MAX_RX_PER_PASS = 512;

const char MODE_DISARMED_S[] FW_FLASH = "disarmed";
const char MODE_ARMED_S[] FW_FLASH = "armed";
const char MODE_LATCHED_S[] FW_FLASH = "latched";
const char* const MODE_NAMES[] FW_FLASH = {MODE_DISARMED_S, MODE_ARMED_S, MODE_LATCHED_S};

const char* modeName(Mode m) { return (const char*)flashPtr((const void* const*)&MODE_NAMES[m]); }

/** TEL field of each channel. */
const uint8_t TEL_FIELD[CH_COUNT] = {F_TEL_THRUST, F_TEL_V, F_TEL_I, F_TEL_RPM, F_TEL_TEMP, F_TEL_TORQUE};

/** Flash name of a value of a message's enum field. */
const char* enumName(uint8_t msg, uint8_t field, uint8_t index) {
  MsgDef m = messageDef(msg);
  FieldDef f = fieldDef(m, field);
  return index < f.nvalues ? enumValue(f, index) : FW_STR("?");
}

uint32_t periodUs(uint16_t hz) { return hz ? 1000000UL / hz : 0; }

}  // namespace

Firmware::Firmware(Hal& hal, const Config& cfg) : hal_(hal), cfg_(cfg) {
  Text caps(caps_, sizeof caps_);
  const struct {
    bool fitted;
    uint8_t ch;
    uint16_t hz;
  } list[] = {
      {cfg_.thrustFitted, CH_THRUST, cfg_.loadCellSps},
      {cfg_.voltageFitted, CH_VOLTAGE, cfg_.analogHz},
      {cfg_.currentFitted, CH_CURRENT, cfg_.analogHz},
      {cfg_.rpmFitted, CH_RPM, cfg_.rpmHz},
      {cfg_.tempFitted, CH_TEMP, cfg_.tempHz},
  };
  for (const auto& c : list) {
    if (!c.fitted) continue;
    if (caps.size() > 0) caps.ch(',');
    caps.str(enumName(MSG_CALSET, F_CALSET_CH, c.ch)).ch('@').u(c.hz);
  }
}

// ------------------------------------------------------------------ main loop

void Firmware::boot(BootCause cause) {
  now_ = hal_.micros();
  Input in = {IN_BOOT, cause == BOOT_POWER_ON ? (uint8_t)FAULT_NONE : (uint8_t)FAULT_RESET, nullptr};
  apply(in);
}

void Firmware::poll() {
  now_ = hal_.micros();
  uint8_t buf[32];
  size_t total = 0;
  while (total < MAX_RX_PER_PASS) {
    size_t n = hal_.read(buf, sizeof buf);
    if (n == 0) break;
    total += n;
    for (size_t i = 0; i < n; i++) {
      LineAssembler::Result r = rx_.push(buf[i]);
      if (r == LineAssembler::LINE) onLine(rx_.line(), rx_.length());
      else if (r == LineAssembler::OVERLONG) {
        stats_.overlong++;
        badLine(DECODE_TOO_LONG);
      }
    }
  }
  runQueue();
  escService();
  sampleSensors();
  watchdogs();
  statIfChanged();
  if (statClock_.due(now_)) sendStat();
  sendTel();
  hal_.watchdogKick();
}

// ------------------------------------------------------------------ the transition function

void Firmware::apply(const Input& in) {
  switch (in.kind) {
    case IN_BOOT: {
      mode_ = MODE_DISARMED;
      cut();
      handshaken_ = false;
      hbOk_ = false;
      qLen_ = 0;
      qHead_ = 0;
      rx_.reset();
      tareLeft_ = 0;
      tareCounts_ = 0;
      overActive_ = false;
      underActive_ = false;
      rpmPrimed_ = false;
      rpmValue_ = 0;
      lastThrustUs_ = now_;
      txSeq_ = 0;
      fault_ = in.fault;
      statClock_.start(now_, (uint32_t)cfg_.statPeriodMs * 1000u);
      uint16_t fastest = 0;
      if (cfg_.thrustFitted && cfg_.loadCellSps > fastest) fastest = cfg_.loadCellSps;
      if ((cfg_.voltageFitted || cfg_.currentFitted) && cfg_.analogHz > fastest) fastest = cfg_.analogHz;
      if (cfg_.rpmFitted && cfg_.rpmHz > fastest) fastest = cfg_.rpmHz;
      if (cfg_.tempFitted && cfg_.tempHz > fastest) fastest = cfg_.tempHz;
      tel_.start(now_, periodUs(fastest));
      analogClock_.start(now_, (cfg_.voltageFitted || cfg_.currentFitted) ? periodUs(cfg_.analogHz) : 0);
      rpmClock_.start(now_, cfg_.rpmFitted ? periodUs(cfg_.rpmHz) : 0);
      tempClock_.start(now_, cfg_.tempFitted ? periodUs(cfg_.tempHz) : 0);
      // A restart mid-run is latched: a host that did not see it must not carry on as if nothing happened.
      if (in.fault == FAULT_NONE) {
        debug(FW_STR("boot: power-on, disarmed"));
      } else {
        mode_ = MODE_LATCHED;
        latchedAtUs_ = now_;
        escHeldLow_ = false;
        debug(FW_STR("boot: restart, latched reset"));
      }
      escService();
      sendIdent(-1, in.fault == FAULT_NONE ? E_IDENT_BOOT_POWER : E_IDENT_BOOT_RESET);
      sendStat();
      return;
    }
    case IN_HEARTBEAT_LOST: {
      hbOk_ = false;
      cut();
      debug(FW_STR("heartbeat lost, us since last HB:"), now_ - lastHbUs_);
      latch(FAULT_HEARTBEAT, FW_STR("no heartbeat within the time-out"));
      sendStat();
      char* t = text_;
      Text msg(t, sizeof text_);
      msg.str(FW_STR("no heartbeat for ")).u(cfg_.heartbeatTimeoutMs).str(FW_STR(" ms: output stopped"));
      log(E_LOG_LEVEL_WARN, msg.c_str());
      return;
    }
    case IN_TRIP: {
      cut();
      latch(in.fault, FW_STR("firmware trip"));
      sendStat();
      Text msg(text_, sizeof text_);
      msg.str(FW_STR("trip ")).str(enumName(MSG_STAT, F_STAT_FAULT, in.fault)).str(FW_STR(": output cut"));
      log(E_LOG_LEVEL_ERROR, msg.c_str());
      return;
    }
    case IN_COMMAND:
      command(*in.command);
      return;
  }
}

void Firmware::command(const Frame& f) {
  switch (f.msg) {
    case MSG_HELLO:
      // The answer copies the HELLO's nonce, so the host can tell it from the IDENT of a boot or an older HELLO.
      sendIdent(f.has(F_HELLO_NONCE) ? (int32_t)f.v[F_HELLO_NONCE].u : -1, -1);
      if (f.v[F_HELLO_PROTO].u == PROTOCOL_VERSION) {
        // A new handshake is a new host session: whatever the old one had running stops.
        if (mode_ == MODE_ARMED) {
          cut();
          enter(MODE_DISARMED, FW_STR("new handshake while armed"));
        }
        handshaken_ = true;
        lastHbUs_ = now_;
        hbOk_ = true;
      } else {
        // A host speaking another version gets IDENT (so it can say what is wrong) and not_ready after it.
        if (mode_ == MODE_ARMED) {
          cut();
          enter(MODE_DISARMED, FW_STR("handshake with another protocol version"));
        }
        handshaken_ = false;
        hbOk_ = false;
      }
      sendStat();
      return;
    case MSG_HB:
      if (handshaken_) {
        lastHbUs_ = now_;
        hbOk_ = true;
      }
      return;
    case MSG_STATUS:
      sendStat();
      return;
    default:
      break;
  }
  // Everything below is acknowledged. Refusals in the order PROTOCOL.md gives: not_ready, then latched, then
  // the command's own. STOP, DISARM and BYE are carried out in every state.
  bool always = f.msg == MSG_STOP || f.msg == MSG_DISARM || f.msg == MSG_BYE;
  if (!always && !handshaken_) return nak(f, WHY_NOT_READY);
  if (!always && f.msg != MSG_CLEAR && mode_ == MODE_LATCHED) return nak(f, WHY_LATCHED);
  switch (f.msg) {
    case MSG_ARM:
      if (commanded_ != 0.0) return nak(f, WHY_THROTTLE_NOT_ZERO);
      enter(MODE_ARMED, FW_STR("armed by host"));
      return ack(f);
    case MSG_DISARM:
      // Always carried out; while latched it changes nothing (the latch already disarmed) but is acknowledged.
      cut();
      if (mode_ == MODE_ARMED) enter(MODE_DISARMED, FW_STR("disarmed by host"));
      return ack(f);
    case MSG_THR: {
      double v = f.v[F_THR_V].num;
      // Refused, never clamped: a clamped command would run the motor at a speed nobody asked for.
      if (v > cfg_.ceiling) return nak(f, WHY_ABOVE_CEILING);
      if (mode_ != MODE_ARMED) {
        if (v != 0.0) return nak(f, WHY_NOT_ARMED);
        commanded_ = 0;
        return ack(f);
      }
      commanded_ = v;
      output_ = v;
      escService();
      return ack(f);
    }
    case MSG_STOP: {
      bool hostTrip = f.has(F_STOP_WHY) && f.v[F_STOP_WHY].e == E_STOP_WHY_HOST_TRIP;
      cut();
      latch(hostTrip ? FAULT_HOST_TRIP : FAULT_ESTOP, hostTrip ? FW_STR("host limit tripped") : FW_STR("emergency stop"));
      return ack(f);
    }
    case MSG_BYE:
      // The host leaves: nothing may keep running, and nobody is left to send heartbeats, so stop watching them
      // (a heartbeat latch after a clean exit would tell the next host nothing true).
      cut();
      if (mode_ == MODE_ARMED) enter(MODE_DISARMED, FW_STR("host ended its session"));
      handshaken_ = false;
      hbOk_ = false;
      return ack(f);
    case MSG_CLEAR:
      if (mode_ == MODE_LATCHED) {
        fault_ = FAULT_NONE;
        // A fresh heartbeat window: the host gets the full time-out to show it is there.
        lastHbUs_ = now_;
        hbOk_ = true;
        overActive_ = false;
        underActive_ = false;
        lastThrustUs_ = now_;
        enter(MODE_DISARMED, FW_STR("fault cleared by host"));
      }
      return ack(f);
    case MSG_TARE:
      if (!cfg_.thrustFitted) return nak(f, WHY_UNSUPPORTED);
      // The protocol has no "armed" refusal; busy is the nearest (the bench is in use).
      if (mode_ == MODE_ARMED || tareLeft_ > 0) return nak(f, WHY_BUSY);
      tareLeft_ = f.has(F_TARE_N) ? (uint16_t)f.v[F_TARE_N].u : DEFAULT_TARE_SAMPLES;
      tareN_ = 0;
      tareSum_ = 0;
      return ack(f);
    case MSG_CALSET: {
      uint8_t ch = f.v[F_CALSET_CH].e;
      Cal* cal = nullptr;
      if (ch == CH_THRUST && cfg_.thrustFitted) cal = &cfg_.thrust;
      if (ch == CH_VOLTAGE && cfg_.voltageFitted) cal = &cfg_.voltage;
      if (ch == CH_CURRENT && cfg_.currentFitted) cal = &cfg_.current;
      if (ch == CH_RPM && cfg_.rpmFitted) cal = &cfg_.rpm;
      if (ch == CH_TEMP && cfg_.tempFitted) cal = &cfg_.temp;
      if (!cal) return nak(f, WHY_UNSUPPORTED);
      // Not while armed: the firmware's own current and voltage limits read through these numbers.
      if (mode_ == MODE_ARMED || tareLeft_ > 0) return nak(f, WHY_BUSY);
      if (f.v[F_CALSET_SCALE].num == 0.0) return nak(f, WHY_BAD_VALUE);
      cal->scale = f.v[F_CALSET_SCALE].num;
      cal->offset = f.v[F_CALSET_OFFSET].num;
      ack(f);
      Text msg(text_, sizeof text_);
      msg.str(FW_STR("calibration set for ")).str(enumName(MSG_CALSET, F_CALSET_CH, ch)).str(FW_STR(" (held until restart)"));
      log(E_LOG_LEVEL_INFO, msg.c_str());
      return;
    }
    default:
      return nak(f, WHY_UNSUPPORTED);
  }
}

/** Output to zero and the throttle command forgotten; the ESC sees it now, before any state change. */
void Firmware::cut() {
  output_ = 0;
  commanded_ = 0;
  escService();
}

/** Latches `fault` unless one is already latched: the first cause is the one worth reporting. */
void Firmware::latch(uint8_t fault, const char* reason) {
  if (fault_ == FAULT_NONE) fault_ = fault;
  enter(MODE_LATCHED, reason);
}

void Firmware::enter(Mode to, const char* reason) {
  Mode from = mode_;
  mode_ = to;
  if (from == to) return;
  if (to == MODE_LATCHED) {
    latchedAtUs_ = now_;
    escHeldLow_ = false;
  }
#if DB_DEBUG_TEXT
  char buf[96];
  Text t(buf, sizeof buf);
  t.str(FW_STR("t=")).u(now_).str(FW_STR(" mode ")).str(modeName(from)).str(FW_STR(" -> ")).str(modeName(to)).str(FW_STR(": ")).str(reason);
  hal_.debug(t.c_str());
#else
  (void)reason;
  (void)modeName;
#endif
  escService();
}

/**
 * The ESC line follows the state: armed, the commanded width; disarmed, the stop pulse; latched, the stop
 * pulse for a short hold and then no pulses at all. Holding the line low is the fallback that does not
 * depend on this firmware's timer: an ESC that sees no signal stops on its own, whereas a stale pulse
 * repeated by a timer would defeat that.
 */
void Firmware::escService() {
  uint16_t want;
  if (mode_ == MODE_LATCHED) {
    if (!escHeldLow_ && now_ - latchedAtUs_ >= (uint32_t)cfg_.escStopHoldMs * 1000u) escHeldLow_ = true;
    want = escHeldLow_ ? 0 : cfg_.escStopUs;
  } else {
    double out = mode_ == MODE_ARMED ? output_ : 0.0;
    want = (uint16_t)(cfg_.escStopUs + (uint16_t)lround(out * (double)(cfg_.escFullUs - cfg_.escStopUs)));
  }
  if (want == escNow_) return;
  escNow_ = want;
  hal_.escWrite(want);
  if (want == 0) debug(FW_STR("esc line held low"));
  else debug(FW_STR("esc pulse us:"), want);
}

// ------------------------------------------------------------------ receive path

void Firmware::onLine(const char* line, size_t len) {
  DecodeResult r = decodeLine(line, len, DIR_H2D, decoded_);
  if (r == DECODE_EMPTY) return;  // a bare newline (someone pressing Enter) is not an error
  if (r != DECODE_OK) {
    badLine(r);
    // The checksum was good and the tag and number readable: say so rather than leave the host waiting.
    if (r >= DECODE_UNKNOWN_FIELD && messageDef(decoded_.msg).acked) nak(decoded_, WHY_BAD_VALUE);
    return;
  }
  stats_.linesIn++;
  if (decoded_.msg == MSG_STOP || decoded_.msg == MSG_HB) {
    // Handled here, ahead of the queue: a STOP behind a burst of THR must not wait for them.
    Input in = {IN_COMMAND, 0, &decoded_};
    apply(in);
    statIfChanged();
    return;
  }
  if (qLen_ >= DB_QUEUE_CAP) {
    if (messageDef(decoded_.msg).acked) nak(decoded_, WHY_BUSY);
    return;
  }
  // Text fields of a queued frame point into the receive buffer and go stale; no queued command reads one.
  queue_[(qHead_ + qLen_) % DB_QUEUE_CAP] = decoded_;
  qLen_++;
}

void Firmware::runQueue() {
  for (uint8_t k = 0; k < cfg_.commandsPerPass && qLen_ > 0; k++) {
    Frame f = queue_[qHead_];
    qHead_ = (uint8_t)((qHead_ + 1) % DB_QUEUE_CAP);
    qLen_--;
    Input in = {IN_COMMAND, 0, &f};
    apply(in);
    statIfChanged();
  }
}

void Firmware::badLine(DecodeResult r) {
  stats_.badLines++;
  if (r < DECODE_RESULT_COUNT) stats_.badByReason[r]++;
  // At most one warning a second: a noisy cable must not turn into a flood in the other direction.
  if (badLogged_ && now_ - lastBadLogUs_ < 1000000UL) return;
  badLogged_ = true;
  lastBadLogUs_ = now_;
  Text msg(text_, sizeof text_);
  msg.str(FW_STR("bad host line: ")).str(decodeResultName(r)).str(FW_STR(" (")).u(stats_.badLines).str(FW_STR(" so far)"));
  log(E_LOG_LEVEL_WARN, msg.c_str());
}

// ------------------------------------------------------------------ sensors and watchdogs

void Firmware::sampleSensors() {
  int32_t counts;
  if (cfg_.thrustFitted && hal_.loadCellRead(&counts)) onThrustCounts(counts);
  if (analogClock_.due(now_)) {
    if (cfg_.voltageFitted) {
      double pv = pinVolts(hal_.analogRead(AIN_VOLTAGE), cfg_.adcRefV, cfg_.adcMax);
      onVoltage(cfg_.voltage.scale * pv + cfg_.voltage.offset);
    }
    if (cfg_.currentFitted) {
      double pv = pinVolts(hal_.analogRead(AIN_CURRENT), cfg_.adcRefV, cfg_.adcMax);
      onCurrent(cfg_.current.scale * pv + cfg_.current.offset);
    }
  }
  if (rpmClock_.due(now_)) {
    uint32_t count, edgeUs;
    hal_.rpmRead(&count, &edgeUs);
    if (!rpmPrimed_) {
      rpmPrimed_ = true;
    } else if (count != rpmCount_) {
      double r = rpmFromEdges(count - rpmCount_, edgeUs - rpmEdgeUs_, cfg_.rpmPulsesPerRev);
      if (!isnan(r)) rpmValue_ = r;
    } else if (now_ - rpmEdgeUs_ > (uint32_t)cfg_.rpmZeroMs * 1000u) {
      rpmValue_ = 0;
    }
    rpmCount_ = count;
    rpmEdgeUs_ = edgeUs;
    tel_.put(CH_RPM, cfg_.rpm.scale * rpmValue_ + cfg_.rpm.offset);
  }
  if (tempClock_.due(now_)) {
    double pv = pinVolts(hal_.analogRead(AIN_TEMP), cfg_.adcRefV, cfg_.adcMax);
    double c = thermistorC(pv, cfg_.adcRefV, cfg_.thermFixedOhm, cfg_.thermR0, cfg_.thermT0C, cfg_.thermBeta);
    // An open or shorted thermistor is left out of telemetry rather than sent as a made-up number.
    if (!isnan(c)) tel_.put(CH_TEMP, cfg_.temp.scale * c + cfg_.temp.offset);
  }
}

void Firmware::onThrustCounts(int32_t counts) {
  lastThrustUs_ = now_;
  if (tareLeft_ > 0) {
    tareSum_ += counts;
    tareN_++;
    if (--tareLeft_ == 0) {
      tareCounts_ = (int32_t)(tareSum_ >= 0 ? (tareSum_ + tareN_ / 2) / tareN_ : -((-tareSum_ + tareN_ / 2) / tareN_));
      Text msg(text_, sizeof text_);
      msg.str(FW_STR("tare done: ")).u(tareN_).str(FW_STR(" samples, offset "));
      if (tareCounts_ < 0) msg.ch('-');
      msg.u(tareCounts_ < 0 ? (uint32_t)(-(int64_t)tareCounts_) : (uint32_t)tareCounts_).str(FW_STR(" counts"));
      log(E_LOG_LEVEL_INFO, msg.c_str());
    }
  }
  tel_.put(CH_THRUST, cfg_.thrust.scale * (double)(counts - tareCounts_) + cfg_.thrust.offset);
}

void Firmware::onCurrent(double amps) {
  tel_.put(CH_CURRENT, amps);
  if (amps > cfg_.overcurrentA) {
    if (!overActive_) {
      overActive_ = true;
      overSinceUs_ = now_;
    }
    if (now_ - overSinceUs_ >= (uint32_t)cfg_.overcurrentMs * 1000u && mode_ != MODE_LATCHED) {
      Input in = {IN_TRIP, FAULT_OVERCURRENT, nullptr};
      apply(in);
    }
  } else {
    overActive_ = false;
  }
}

void Firmware::onVoltage(double volts) {
  tel_.put(CH_VOLTAGE, volts);
  // Watched only while armed: with the ESC supply connected last (as it should be), a disarmed bench
  // reads 0 V, and there is nothing to cut.
  if (cfg_.brownoutV > 0 && mode_ == MODE_ARMED && volts < cfg_.brownoutV) {
    if (!underActive_) {
      underActive_ = true;
      underSinceUs_ = now_;
    }
    if (now_ - underSinceUs_ >= (uint32_t)cfg_.brownoutMs * 1000u) {
      Input in = {IN_TRIP, FAULT_BROWNOUT, nullptr};
      apply(in);
    }
  } else {
    underActive_ = false;
  }
}

void Firmware::watchdogs() {
  if (handshaken_ && hbOk_ && now_ - lastHbUs_ > (uint32_t)cfg_.heartbeatTimeoutMs * 1000u) {
    Input in = {IN_HEARTBEAT_LOST, 0, nullptr};
    apply(in);
  }
  if (cfg_.thrustFitted && mode_ != MODE_LATCHED && now_ - lastThrustUs_ > (uint32_t)cfg_.loadCellTimeoutMs * 1000u) {
    Input in = {IN_TRIP, FAULT_SENSOR, nullptr};
    apply(in);
  }
}

// ------------------------------------------------------------------ transmit path

void Firmware::send(Frame& f, bool isTelemetry) {
  f.seq = txSeq_;
  size_t n = encodeFrame(f, tx_, sizeof tx_);
  if (n == 0) {
    debug(FW_STR("encode failed for message id:"), f.msg);
    return;
  }
  if (isTelemetry && hal_.writeRoom() < n) {
    // Telemetry waits for room; the samples stay pending and go out in the next frame.
    stats_.telDeferred++;
    return;
  }
  hal_.write((const uint8_t*)tx_, n);
  txSeq_ = (uint16_t)(txSeq_ + 1u);
  stats_.linesOut++;
  if (isTelemetry) tel_.sent();
}

void Firmware::ack(const Frame& cmd) {
  out_.clear(MSG_ACK, 0);
  out_.setUint(F_ACK_REF, cmd.seq);
  send(out_);
}

void Firmware::nak(const Frame& cmd, uint8_t why) {
  out_.clear(MSG_NAK, 0);
  out_.setUint(F_NAK_REF, cmd.seq);
  out_.setEnum(F_NAK_WHY, why);
  send(out_);
}

void Firmware::log(uint8_t level, const char* ramText) {
  out_.clear(MSG_LOG, 0);
  out_.setEnum(F_LOG_LEVEL, level);
  out_.setSpan(F_LOG_MSG, ramText, strlen(ramText));
  send(out_);
}

void Firmware::sendIdent(int32_t nonce, int8_t boot) {
  out_.clear(MSG_IDENT, 0);
  out_.setUint(F_IDENT_PROTO, PROTOCOL_VERSION);
  out_.setSpan(F_IDENT_FW, cfg_.name, strlen(cfg_.name));
  out_.setSpan(F_IDENT_FWVER, cfg_.version, strlen(cfg_.version));
  out_.setSpan(F_IDENT_CAPS, caps_, strlen(caps_));
  out_.setNum(F_IDENT_THRMAX, cfg_.ceiling);
  out_.setUint(F_IDENT_HB, cfg_.heartbeatTimeoutMs);
  out_.setUint(F_IDENT_ESCRATE, cfg_.escRateHz);
  if (nonce >= 0) out_.setUint(F_IDENT_NONCE, (uint32_t)nonce);
  if (boot >= 0) out_.setEnum(F_IDENT_BOOT, (uint8_t)boot);
  send(out_);
}

uint16_t Firmware::statSignature() const {
  uint16_t milli = (uint16_t)lround(output_ * 1000.0);
  return (uint16_t)((armed() ? 1u : 0u) | (hbOk_ ? 2u : 0u) | ((uint16_t)fault_ << 2) | (uint16_t)(milli << 5));
}

void Firmware::sendStat() {
  lastStatSig_ = statSignature();
  statClock_.start(now_, (uint32_t)cfg_.statPeriodMs * 1000u);
  out_.clear(MSG_STAT, 0);
  out_.setBool(F_STAT_ARMED, armed());
  out_.setNum(F_STAT_OUT, output_);
  out_.setEnum(F_STAT_FAULT, fault_);
  out_.setBool(F_STAT_HBOK, hbOk_);
  send(out_);
}

void Firmware::statIfChanged() {
  if (statSignature() != lastStatSig_) sendStat();
}

void Firmware::sendTel() {
  if (!tel_.frameDue(now_)) return;
  MsgDef tel = messageDef(MSG_TEL);
  out_.clear(MSG_TEL, 0);
  out_.setUint(F_TEL_T, now_);
  for (uint8_t ch = 0; ch < CH_COUNT; ch++) {
    if (!(tel_.pending() & (1u << ch))) continue;
    double v = tel_.value(ch);
    if (isnan(v)) continue;
    // A converter saturates at the protocol's range rather than send a value the protocol forbids.
    FieldDef d = fieldDef(tel, TEL_FIELD[ch]);
    if (v < d.min) v = d.min;
    if (v > d.max) v = d.max;
    out_.setNum(TEL_FIELD[ch], v);
  }
  out_.setNum(F_TEL_OUT, output_);
  send(out_, true);
}

void Firmware::debug(const char* flashText, uint32_t value) {
#if DB_DEBUG_TEXT
  char buf[96];
  Text t(buf, sizeof buf);
  t.str(FW_STR("t=")).u(now_).ch(' ').str(flashText);
  if (value != 0xFFFFFFFFUL) t.ch(' ').u(value);
  hal_.debug(t.c_str());
#else
  (void)flashText;
  (void)value;
#endif
}

}  // namespace db
