// A scripted board for the tests: a clock moved by hand, bytes in and out as strings, a load cell that
// converts at its configured rate, analog inputs set directly, and a record of every ESC write.
#pragma once

#include <map>
#include <string>
#include <vector>

#include "../core/codec.h"
#include "../core/crc16.h"
#include "../core/firmware.h"
#include "check.h"

namespace t {

struct EscWrite {
  uint32_t atUs;
  uint16_t pulseUs;
};

class FakeHal : public db::Hal {
 public:
  uint32_t clock = 1000;
  std::string rx;
  std::string tx;
  size_t room = 1u << 20;
  std::vector<EscWrite> esc;
  bool loadCellAlive = true;
  uint32_t loadPeriodUs = 12500;
  uint32_t nextLoadUs = 0;
  int32_t loadCounts = 0;
  int loadReads = 0;
  uint16_t analog[3] = {0, 0, 0};
  uint32_t rpmCount = 0;
  uint32_t rpmEdgeUs = 0;
  int kicks = 0;
  std::vector<std::string> debugLines;

  uint32_t micros() override { return clock; }
  size_t read(uint8_t* buf, size_t max) override {
    size_t n = rx.size() < max ? rx.size() : max;
    for (size_t i = 0; i < n; i++) buf[i] = (uint8_t)rx[i];
    rx.erase(0, n);
    return n;
  }
  size_t writeRoom() override { return room; }
  void write(const uint8_t* buf, size_t n) override { tx.append((const char*)buf, n); }
  void escWrite(uint16_t pulseUs) override { esc.push_back({clock, pulseUs}); }
  bool loadCellRead(int32_t* counts) override {
    if (!loadCellAlive || (int32_t)(clock - nextLoadUs) < 0) return false;
    nextLoadUs += loadPeriodUs;  // keeps the converter's own phase, as a free-running ADC does
    *counts = loadCounts;
    loadReads++;
    return true;
  }
  uint16_t analogRead(db::AnalogInput input) override { return analog[input]; }
  void rpmRead(uint32_t* count, uint32_t* lastEdgeUs) override {
    *count = rpmCount;
    *lastEdgeUs = rpmEdgeUs;
  }
  void watchdogKick() override { kicks++; }
  void debug(const char* text) override { debugLines.push_back(text); }
};

/** A device line as the tests see it: tag, sequence number and field texts. */
struct Line {
  std::string raw;
  std::string tag;
  uint32_t seq = 0;
  std::map<std::string, std::string> f;
  bool is(const char* t) const { return tag == t; }
  std::string operator[](const char* k) const {
    auto it = f.find(k);
    return it == f.end() ? std::string("<absent>") : it->second;
  }
  bool has(const char* k) const { return f.count(k) != 0; }
};

inline std::string withCrc(const std::string& body) {
  char hex[8];
  std::snprintf(hex, sizeof hex, "*%04X", db::crc16(body.data(), body.size()));
  return body + hex;
}

/** A firmware on a fake board, with helpers to talk to it as a host would. */
class Rig {
 public:
  FakeHal hal;
  db::Config cfg;
  db::Firmware* fw = nullptr;
  uint16_t hostSeq = 0;
  std::vector<Line> lines;  // every device line so far, decoded
  int64_t lastDeviceSeq = -1;

  explicit Rig(const db::Config& c = testConfig(), db::BootCause cause = db::BOOT_POWER_ON) : cfg(c) {
    hal.loadPeriodUs = 1000000u / cfg.loadCellSps;
    hal.nextLoadUs = hal.clock + hal.loadPeriodUs;
    hal.analog[db::AIN_VOLTAGE] = 120;  // 12.0 V supply
    hal.analog[db::AIN_TEMP] = 511;     // thermistor near its reference temperature
    fw = new db::Firmware(hal, cfg);
    fw->boot(cause);
    collect();
  }
  ~Rig() { delete fw; }
  Rig(const Rig&) = delete;
  Rig& operator=(const Rig&) = delete;

  /** Bench settings with plain numbers: 1 count = 1 mN, the pins read their value in volts directly. */
  static db::Config testConfig() {
    db::Config c = db::defaultConfig();
    c.name = "ductbench-ref";
    c.version = "1.0.0+test";
    c.ceiling = 0.8;
    c.thrust = {0.001, 0.0};
    c.adcRefV = 1023.0;  // one count is one volt at the pin
    c.adcMax = 1023;
    c.voltage = {0.1, 0.0};  // 10 counts per volt
    c.current = {0.1, 0.0};  // 10 counts per ampere
    return c;
  }

  /** Queues one host line (checksum added) for the next poll. */
  uint16_t send(const std::string& tagAndFields) {
    uint16_t seq = hostSeq++;
    std::string body = tagAndFields;
    size_t sp = body.find(' ');
    std::string tag = sp == std::string::npos ? body : body.substr(0, sp);
    std::string rest = sp == std::string::npos ? "" : body.substr(sp);
    hal.rx += withCrc(tag + " " + std::to_string(seq) + rest) + "\n";
    return seq;
  }
  void raw(const std::string& bytes) { hal.rx += bytes; }

  /** Advances the clock in steps, polling each step; HB every 100 ms when heartbeat is true. */
  void run(uint32_t ms, bool heartbeat = true, uint32_t stepUs = 1000) {
    uint64_t end = (uint64_t)ms * 1000u;
    for (uint64_t t0 = 0; t0 < end; t0 += stepUs) {
      if (heartbeat && (hal.clock - lastHbUs) >= 100000u) {
        send("HB");
        lastHbUs = hal.clock;
      }
      hal.clock += stepUs;
      fw->poll();
      collect();
    }
  }
  void poll() {
    fw->poll();
    collect();
  }
  /** HELLO and the answers; then heartbeats can flow. */
  void handshake() {
    send("HELLO proto=1 host=test");
    poll();
    lastHbUs = hal.clock;
  }
  void arm() {
    send("ARM");
    poll();
  }

  /** Device lines from index `from` on with the given tag. */
  std::vector<Line> all(const char* tag, size_t from = 0) const {
    std::vector<Line> r;
    for (size_t i = from; i < lines.size(); i++)
      if (lines[i].tag == tag) r.push_back(lines[i]);
    return r;
  }
  const Line* last(const char* tag) const {
    for (size_t i = lines.size(); i-- > 0;)
      if (lines[i].tag == tag) return &lines[i];
    return nullptr;
  }
  /** The answer (ACK or NAK) to host command `seq`, or null. */
  const Line* answer(uint16_t seq) const {
    for (const Line& l : lines)
      if ((l.is("ACK") || l.is("NAK")) && l["ref"] == std::to_string(seq)) return &l;
    return nullptr;
  }
  std::string why(uint16_t seq) const {
    const Line* a = answer(seq);
    if (!a) return "<no answer>";
    return a->is("ACK") ? std::string("ack") : (*a)["why"];
  }
  size_t mark() const { return lines.size(); }

  uint32_t lastHbUs = 0;

 private:
  /** Splits what the device wrote into lines; every one must decode and sequence numbers must follow on. */
  void collect() {
    size_t nl;
    while ((nl = hal.tx.find('\n')) != std::string::npos) {
      std::string raw = hal.tx.substr(0, nl);
      hal.tx.erase(0, nl + 1);
      db::Frame fr;
      db::DecodeResult r = db::decodeLine(raw.data(), raw.size(), db::DIR_D2H, fr);
      if (r != db::DECODE_OK) t::fail(__FILE__, __LINE__, "device sent an undecodable line (" + std::string(db::decodeResultName(r)) + "): " + raw);
      Line l;
      l.raw = raw;
      size_t star = raw.rfind('*');
      std::string body = raw.substr(0, star);
      size_t sp1 = body.find(' ');
      l.tag = body.substr(0, sp1);
      size_t sp2 = body.find(' ', sp1 + 1);
      l.seq = (uint32_t)std::stoul(body.substr(sp1 + 1, sp2 == std::string::npos ? std::string::npos : sp2 - sp1 - 1));
      if (lastDeviceSeq >= 0 && l.seq != (uint32_t)((lastDeviceSeq + 1) % 65536)) t::fail(__FILE__, __LINE__, "device sequence gap before: " + raw);
      lastDeviceSeq = l.seq;
      size_t pos = sp2;
      while (pos != std::string::npos && pos < body.size()) {
        size_t eq = body.find('=', pos + 1);
        std::string key = body.substr(pos + 1, eq - pos - 1);
        size_t end = key == "msg" ? std::string::npos : body.find(' ', eq + 1);
        l.f[key] = body.substr(eq + 1, end == std::string::npos ? std::string::npos : end - eq - 1);
        pos = end;
      }
      lines.push_back(l);
    }
  }
};

}  // namespace t
