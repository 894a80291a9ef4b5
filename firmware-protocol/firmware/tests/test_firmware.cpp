// The firmware state machine on a scripted board with a hand-driven clock: handshake, arming rules, the
// ceiling, heartbeat loss, STOP ahead of the queue, the latch, watchdog restarts, telemetry and sensors.
// Exact timing is checked here, where the clock is ours; the pseudo-terminal test only checks the outcome.

#include <cmath>

#include "../core/sensors.h"
#include "fake_hal.h"

using t::Rig;

namespace {
db::Config cfgWith(void (*edit)(db::Config&)) {
  db::Config c = Rig::testConfig();
  edit(c);
  return c;
}
uint16_t lastEsc(const Rig& r) { return r.hal.esc.empty() ? 0xFFFF : r.hal.esc.back().pulseUs; }
}  // namespace

TEST_CASE("power-on boot: ESC at the stop pulse first, then IDENT and STAT with fault none") {
  Rig r;
  CHECK(!r.hal.esc.empty());
  CHECK_EQ(r.hal.esc.front().pulseUs, (uint16_t)1000);
  CHECK(r.lines.size() >= 2);
  CHECK(r.lines[0].is("IDENT"));
  CHECK_EQ(r.lines[0].seq, 0u);
  CHECK_EQ(r.lines[0]["fw"], std::string("ductbench-ref"));
  CHECK_EQ(r.lines[0]["thrmax"], std::string("0.800"));
  CHECK_EQ(r.lines[0]["hb"], std::string("300"));
  CHECK_EQ(r.lines[0]["escrate"], std::string("50"));
  CHECK(r.lines[1].is("STAT"));
  CHECK_EQ(r.lines[1]["fault"], std::string("none"));
  CHECK_EQ(r.lines[1]["armed"], std::string("0"));
  CHECK_EQ(r.lines[1]["hbok"], std::string("0"));
  CHECK_EQ(r.fw->mode(), db::MODE_DISARMED);
}

TEST_CASE("IDENT caps carry the bridge ADC's own rate: thrust@80 or thrust@10") {
  // The two-wire 24-bit bridge ADC converts at 10 or 80 samples/s, chosen by its RATE pin (its datasheet,
  // as in shared CHECKS.md "Sensors and calibration").
  Rig fast(cfgWith([](db::Config& c) { c.loadCellSps = 80; }));
  CHECK_EQ(fast.lines[0]["caps"], std::string("thrust@80,voltage@100,current@100,rpm@10,temp@2"));
  Rig slow(cfgWith([](db::Config& c) { c.loadCellSps = 10; }));
  CHECK_EQ(slow.lines[0]["caps"].substr(0, 10), std::string("thrust@10,"));
  CHECK(db::validateConfig(fast.cfg) == nullptr);
  CHECK(db::validateConfig(slow.cfg) == nullptr);
  db::Config odd = Rig::testConfig();
  odd.loadCellSps = 20;  // not a rate the converter has
  CHECK(db::validateConfig(odd) != nullptr);
  // And the frames match it: over 2 s at 80 samples/s about 160 thrust values, each a fresh conversion.
  fast.handshake();
  size_t m = fast.mark();
  int before = fast.hal.loadReads;
  fast.run(2000);
  int thrustFrames = 0;
  for (auto& l : fast.all("TEL", m))
    if (l.has("thrust")) thrustFrames++;
  CHECK_EQ(thrustFrames, fast.hal.loadReads - before);
  CHECK(thrustFrames >= 158 && thrustFrames <= 161);
}

TEST_CASE("configuration limits: heartbeat at most 300 ms, ESC 50..490 Hz, ceiling 0..1 in steps of 0.001") {
  db::Config c = Rig::testConfig();
  CHECK(db::validateConfig(c) == nullptr);
  c.heartbeatTimeoutMs = 301;
  CHECK(db::validateConfig(c) != nullptr);
  c = Rig::testConfig();
  c.escRateHz = 49;
  CHECK(db::validateConfig(c) != nullptr);
  c.escRateHz = 491;
  CHECK(db::validateConfig(c) != nullptr);
  c.escRateHz = 490;  // 2040 us period still fits a 2000 us pulse (common practice range 50..490 Hz)
  CHECK(db::validateConfig(c) == nullptr);
  c = Rig::testConfig();
  c.ceiling = 1.2;
  CHECK(db::validateConfig(c) != nullptr);
  c.ceiling = 0.8005;
  CHECK(db::validateConfig(c) != nullptr);
  CHECK(db::validateConfig(db::defaultConfig()) == nullptr);
}

TEST_CASE("before the handshake: ARM gets not_ready, STOP and DISARM are carried out, HB is ignored, STATUS is answered") {
  Rig r;
  uint16_t arm = r.send("ARM");
  uint16_t disarm = r.send("DISARM");
  r.send("HB");
  size_t m = r.mark();
  r.send("STATUS");
  r.poll();
  CHECK_EQ(r.why(arm), std::string("not_ready"));
  CHECK_EQ(r.why(disarm), std::string("ack"));
  CHECK(!r.fw->hbOk());
  CHECK_EQ(r.all("STAT", m).size(), (size_t)1);
  CHECK_EQ(r.all("STAT", m)[0]["hbok"], std::string("0"));
  r.run(1000, false);  // no heartbeat watchdog before a handshake
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
  uint16_t stop = r.send("STOP");
  r.poll();
  CHECK_EQ(r.why(stop), std::string("ack"));
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_ESTOP);
}

TEST_CASE("IDENT copies the HELLO's nonce; the IDENT sent at boot carries boot= and no nonce") {
  Rig r;
  CHECK(r.lines[0].is("IDENT"));
  CHECK_EQ(r.lines[0]["boot"], std::string("power"));
  CHECK(!r.lines[0].has("nonce"));
  size_t m = r.mark();
  r.send("HELLO proto=1 nonce=40961");
  r.poll();
  CHECK(r.lines[m].is("IDENT"));
  CHECK_EQ(r.lines[m]["nonce"], std::string("40961"));
  CHECK(!r.lines[m].has("boot"));
  m = r.mark();
  r.send("HELLO proto=1");
  r.poll();
  CHECK(r.lines[m].is("IDENT"));
  CHECK(!r.lines[m].has("nonce"));
}

TEST_CASE("BYE disarms, forgets the handshake and stops the heartbeat watch without latching") {
  Rig r;
  r.handshake();
  uint16_t arm = r.send("ARM");
  r.run(20);
  CHECK_EQ(r.why(arm), std::string("ack"));
  uint16_t bye = r.send("BYE");
  r.poll();
  CHECK_EQ(r.why(bye), std::string("ack"));
  CHECK(!r.fw->armed());
  CHECK(!r.fw->handshaken());
  r.run(1000, false);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
  uint16_t arm2 = r.send("ARM");
  r.poll();
  CHECK_EQ(r.why(arm2), std::string("not_ready"));
}

TEST_CASE("handshake answers IDENT then STAT with hbok=1; a HELLO of another version leaves it not ready") {
  Rig r;
  size_t m = r.mark();
  r.handshake();
  CHECK(r.lines[m].is("IDENT"));
  CHECK(r.lines[m + 1].is("STAT"));
  CHECK_EQ(r.lines[m + 1]["hbok"], std::string("1"));
  CHECK(r.fw->handshaken());
  m = r.mark();
  r.send("HELLO proto=2");
  r.poll();
  CHECK(r.lines[m].is("IDENT"));
  CHECK_EQ(r.lines[m]["proto"], std::string("1"));
  uint16_t arm = r.send("ARM");
  r.poll();
  CHECK_EQ(r.why(arm), std::string("not_ready"));
}

TEST_CASE("arming: only at zero throttle; THR maps to the pulse width; disarm zeroes the command") {
  Rig r;
  r.handshake();
  uint16_t arm = r.send("ARM");
  r.run(20);
  CHECK_EQ(r.why(arm), std::string("ack"));
  CHECK(r.fw->armed());
  uint16_t thr = r.send("THR v=0.3000");
  r.run(20);
  CHECK_EQ(r.why(thr), std::string("ack"));
  CHECK_EQ(lastEsc(r), (uint16_t)1300);
  uint16_t again = r.send("ARM");
  r.run(20);
  CHECK_EQ(r.why(again), std::string("throttle_not_zero"));
  CHECK_EQ(lastEsc(r), (uint16_t)1300);  // refused: nothing changed
  r.send("THR v=0.5000");
  r.run(20);
  CHECK_EQ(lastEsc(r), (uint16_t)1500);
  uint16_t dis = r.send("DISARM");
  r.run(20);
  CHECK_EQ(r.why(dis), std::string("ack"));
  CHECK_EQ(lastEsc(r), (uint16_t)1000);
  CHECK_EQ(r.fw->commanded(), 0.0);
  uint16_t rearm = r.send("ARM");  // throttle was zeroed by the disarm
  r.run(20);
  CHECK_EQ(r.why(rearm), std::string("ack"));
  CHECK_EQ(lastEsc(r), (uint16_t)1000);
}

TEST_CASE("throttle ceiling: above it refused, never clamped; at it accepted; disarmed only zero") {
  Rig r;
  r.handshake();
  uint16_t d1 = r.send("THR v=0.2000");
  uint16_t d0 = r.send("THR v=0.0000");
  r.run(10);
  CHECK_EQ(r.why(d1), std::string("not_armed"));
  CHECK_EQ(r.why(d0), std::string("ack"));
  r.arm();
  r.send("THR v=0.3000");
  r.run(10);
  uint16_t over = r.send("THR v=0.8500");
  uint16_t hair = r.send("THR v=0.80001");
  r.run(10);
  CHECK_EQ(r.why(over), std::string("above_ceiling"));
  CHECK_EQ(r.why(hair), std::string("above_ceiling"));
  CHECK_EQ(r.fw->output(), 0.3);
  CHECK_EQ(lastEsc(r), (uint16_t)1300);
  uint16_t at = r.send("THR v=0.8000");
  r.run(10);
  CHECK_EQ(r.why(at), std::string("ack"));
  CHECK_EQ(lastEsc(r), (uint16_t)1800);
  // Above the ceiling is refused even while disarmed, ahead of not_armed.
  r.send("DISARM");
  uint16_t off = r.send("THR v=0.9000");
  r.run(10);
  CHECK_EQ(r.why(off), std::string("above_ceiling"));
}

TEST_CASE("heartbeat loss: at exactly 300 ms still running, past it stop pulse, disarm, latch, then line low") {
  Rig r;
  r.handshake();
  r.arm();
  r.send("THR v=0.4000");
  r.run(250);  // with heartbeats
  CHECK_EQ(lastEsc(r), (uint16_t)1400);
  uint32_t lastHb = r.hal.clock;
  r.send("HB");
  r.poll();
  size_t m = r.mark();
  // Step to exactly the time-out: not yet (the rule is "more than 300 ms").
  while (r.hal.clock - lastHb < 300000u) {
    r.hal.clock += 500;
    r.poll();
  }
  CHECK_EQ(r.hal.clock - lastHb, 300000u);
  CHECK(r.fw->armed());
  CHECK_EQ(lastEsc(r), (uint16_t)1400);
  r.hal.clock += 1;
  r.poll();
  CHECK(!r.fw->armed());
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_HEARTBEAT);
  CHECK_EQ(lastEsc(r), (uint16_t)1000);
  CHECK_EQ(r.hal.esc.back().atUs, lastHb + 300001u);
  auto stats = r.all("STAT", m);
  CHECK(!stats.empty());
  if (!stats.empty()) {
    CHECK_EQ(stats.back()["fault"], std::string("heartbeat"));
    CHECK_EQ(stats.back()["out"], std::string("0.000"));
    CHECK_EQ(stats.back()["hbok"], std::string("0"));
  }
  const t::Line* log = r.last("LOG");
  CHECK(log && (*log)["msg"] == "no heartbeat for 300 ms: output stopped");
  // The stop pulse is held for the configured time, then no pulses at all.
  r.run(r.cfg.escStopHoldMs - 5, false);
  CHECK_EQ(lastEsc(r), (uint16_t)1000);
  r.run(10, false);
  CHECK_EQ(lastEsc(r), (uint16_t)0);
  r.run(1000, false);
  CHECK_EQ(lastEsc(r), (uint16_t)0);
}

TEST_CASE("heartbeat loss while disarmed latches too, and the watchdog works across the micros() wrap") {
  Rig r;
  r.hal.clock = 0xFFFFFFFFu - 150000u;  // 150 ms before the 32-bit counter wraps
  r.hal.nextLoadUs = r.hal.clock;
  r.fw->boot(db::BOOT_POWER_ON);
  r.lastDeviceSeq = -1;
  r.lines.clear();
  r.handshake();
  r.run(400);  // heartbeats keep it alive across the wrap
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
  CHECK(r.hal.clock < 1000000u);  // wrapped
  r.send("HB");
  r.poll();
  r.run(290, false);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
  r.run(30, false);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_HEARTBEAT);
  // TEL t is the wrapped counter
  bool sawSmall = false;
  for (auto& l : r.all("TEL"))
    if (std::stoul(l["t"]) < 1000000u) sawSmall = true;
  CHECK(sawSmall);
}

TEST_CASE("STOP is carried out as soon as its line is decoded, ahead of commands queued before it") {
  Rig r;
  r.handshake();
  r.arm();
  r.send("THR v=0.3000");
  r.run(10);
  size_t escBefore = r.hal.esc.size();
  size_t m = r.mark();
  // One burst: two throttle changes and then the stop, all in the receive buffer at once.
  uint16_t a = r.send("THR v=0.5000");
  uint16_t b = r.send("THR v=0.6000");
  uint16_t s = r.send("STOP");
  r.poll();
  CHECK_EQ(r.why(s), std::string("ack"));
  CHECK_EQ(r.why(a), std::string("latched"));
  CHECK_EQ(r.why(b), std::string("latched"));
  // The ACK of STOP comes before any answer to the THR lines, and the ESC never saw 1500 or 1600.
  CHECK(r.lines[m].is("ACK"));
  CHECK_EQ(r.lines[m]["ref"], std::to_string(s));
  for (size_t i = escBefore; i < r.hal.esc.size(); i++) CHECK(r.hal.esc[i].pulseUs <= 1000);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_ESTOP);
  CHECK_EQ(r.fw->output(), 0.0);
}

TEST_CASE("STOP why=host_trip latches host_trip; the first fault wins over a later heartbeat loss") {
  Rig r;
  r.handshake();
  r.arm();
  r.send("STOP why=host_trip");
  r.run(10);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_HOST_TRIP);
  r.run(500, false);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_HOST_TRIP);
  CHECK(!r.fw->hbOk());
}

TEST_CASE("while latched only HELLO, HB, STATUS, STOP, CLEAR and DISARM are carried out; CLEAR leaves it disarmed") {
  Rig r;
  r.handshake();
  r.send("STOP");
  r.run(10);
  uint16_t arm = r.send("ARM");
  uint16_t thr = r.send("THR v=0.0000");
  uint16_t tare = r.send("TARE");
  uint16_t cal = r.send("CALSET ch=current scale=1.000000 offset=0.000000");
  uint16_t dis = r.send("DISARM");
  uint16_t stop = r.send("STOP");
  r.run(10);
  CHECK_EQ(r.why(arm), std::string("latched"));
  CHECK_EQ(r.why(thr), std::string("latched"));
  CHECK_EQ(r.why(tare), std::string("latched"));
  CHECK_EQ(r.why(cal), std::string("latched"));
  CHECK_EQ(r.why(dis), std::string("ack"));
  CHECK_EQ(r.why(stop), std::string("ack"));
  CHECK_EQ(r.fw->mode(), db::MODE_LATCHED);
  size_t m = r.mark();
  r.send("STATUS");
  r.send("HELLO proto=1");
  r.run(10);
  CHECK(!r.all("STAT", m).empty());
  CHECK(!r.all("IDENT", m).empty());
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_ESTOP);  // a HELLO does not clear a latch
  r.run(600);  // the line goes low after the hold
  CHECK_EQ(lastEsc(r), (uint16_t)0);
  uint16_t clr = r.send("CLEAR");
  r.run(10);
  CHECK_EQ(r.why(clr), std::string("ack"));
  CHECK_EQ(r.fw->mode(), db::MODE_DISARMED);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
  CHECK_EQ(lastEsc(r), (uint16_t)1000);  // stop pulse again, so the ESC sees a valid signal before arming
  CHECK_EQ(r.last("STAT")->f.at("fault"), std::string("none"));
}

TEST_CASE("watchdog restart comes back disarmed with reset latched until CLEAR") {
  Rig r(Rig::testConfig(), db::BOOT_RESET);
  CHECK_EQ(r.lines[1]["fault"], std::string("reset"));
  CHECK_EQ(r.fw->mode(), db::MODE_LATCHED);
  CHECK_EQ(lastEsc(r), (uint16_t)1000);
  r.handshake();
  uint16_t arm = r.send("ARM");
  r.run(10);
  CHECK_EQ(r.why(arm), std::string("latched"));
  r.run(600);
  CHECK_EQ(lastEsc(r), (uint16_t)0);
  r.send("CLEAR");
  uint16_t arm2 = r.send("ARM");
  r.run(10);
  CHECK_EQ(r.why(arm2), std::string("ack"));
  CHECK(r.hal.kicks > 100);  // the hardware watchdog is fed once a pass
}

TEST_CASE("a HELLO while armed sets the stop output and disarms") {
  Rig r;
  r.handshake();
  r.arm();
  r.send("THR v=0.2000");
  r.run(10);
  CHECK_EQ(lastEsc(r), (uint16_t)1200);
  r.send("HELLO proto=1");
  r.run(10);
  CHECK(!r.fw->armed());
  CHECK_EQ(lastEsc(r), (uint16_t)1000);
  CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
}

TEST_CASE("TARE: busy while armed or running, averages n conversions, reported by a LOG") {
  Rig r;
  r.handshake();
  r.hal.loadCounts = 1234;
  r.run(100);
  std::string before;
  for (auto& l : r.all("TEL"))
    if (l.has("thrust")) before = l["thrust"];
  CHECK_EQ(before, std::string("1.2340"));
  uint16_t tare = r.send("TARE n=8");
  uint16_t busy = r.send("TARE");
  r.run(10);
  CHECK_EQ(r.why(tare), std::string("ack"));
  CHECK_EQ(r.why(busy), std::string("busy"));
  r.run(200);
  const t::Line* log = r.last("LOG");
  CHECK(log && (*log)["msg"] == "tare done: 8 samples, offset 1234 counts");
  r.hal.loadCounts = 1234 + 2500;  // 2.5 N at 1 mN a count
  r.run(50);
  std::string after;
  for (auto& l : r.all("TEL"))
    if (l.has("thrust")) after = l["thrust"];
  CHECK_EQ(after, std::string("2.5000"));
  r.arm();
  uint16_t armedTare = r.send("TARE");
  r.run(10);
  CHECK_EQ(r.why(armedTare), std::string("busy"));
}

TEST_CASE("telemetry: each TEL carries only channels sampled since the last frame, t is micros(), out always") {
  Rig r;
  r.handshake();
  size_t m = r.mark();
  r.run(1000);
  auto tels = r.all("TEL", m);
  int v = 0, th = 0, rpm = 0, temp = 0;
  uint32_t prevT = 0;
  for (auto& l : tels) {
    if (l.has("v")) v++;
    if (l.has("thrust")) th++;
    if (l.has("rpm")) rpm++;
    if (l.has("temp")) temp++;
    CHECK(l.has("out"));
    uint32_t tt = (uint32_t)std::stoul(l["t"]);
    CHECK(tt > prevT);
    prevT = tt;
  }
  CHECK(v >= 99 && v <= 101);   // voltage@100
  CHECK(th >= 79 && th <= 81);  // thrust@80
  CHECK(rpm >= 9 && rpm <= 11);
  CHECK(temp >= 1 && temp <= 3);
  CHECK(tels.size() <= 102);  // frames at the fastest channel's rate, no more
  // STAT at least every 200 ms
  CHECK(r.all("STAT", m).size() >= 5);
}

TEST_CASE("telemetry waits for room in the transmit buffer; answers do not") {
  Rig r;
  r.handshake();
  r.hal.room = 10;
  size_t m = r.mark();
  uint16_t st = r.send("STATUS");
  (void)st;
  uint16_t arm = r.send("ARM");
  r.run(100);
  CHECK(r.all("TEL", m).empty());
  CHECK_EQ(r.why(arm), std::string("ack"));
  r.hal.room = 1u << 20;
  r.run(20);
  CHECK(!r.all("TEL", m).empty());
  CHECK(r.fw->stats().telDeferred > 0);
}

TEST_CASE("sensor conversions: current and voltage scale, rpm from edges, thermistor by the beta equation") {
  Rig r;
  r.handshake();
  r.hal.analog[db::AIN_VOLTAGE] = 121;  // 12.1 V
  r.hal.analog[db::AIN_CURRENT] = 35;   // 3.5 A
  r.hal.rpmCount = 0;
  r.hal.rpmEdgeUs = r.hal.clock;
  r.run(500);
  // 100 pulses over 0.5 s at one pulse a revolution: 12000 rpm.
  r.hal.rpmCount = 100;
  r.hal.rpmEdgeUs += 500000u;
  r.run(150);
  const t::Line* tel = r.last("TEL");
  CHECK(tel && (*tel)["v"] == "12.100" && (*tel)["i"] == "3.500");
  std::string rpm;
  for (auto& l : r.all("TEL"))
    if (l.has("rpm")) rpm = l["rpm"];
  CHECK_EQ(rpm, std::string("12000"));
  // Beta equation 1/T = 1/T0 + ln(R/R0)/B (common practice; from memory): at R = R0 it reads T0, and for
  // B = 3950 K the resistance at 50 degC is R0 * exp(B (1/323.15 - 1/298.15)) = 3588.1 ohm (derived).
  CHECK_NEAR(db::thermistorC(2.5, 5.0, 10000, 10000, 25, 3950), 25.0, 1e-9);
  double r50 = 10000 * std::exp(3950 * (1 / 323.15 - 1 / 298.15));
  CHECK_NEAR(r50, 3588.1, 0.1);
  double pv = 5.0 * r50 / (10000 + r50);
  CHECK_NEAR(db::thermistorC(pv, 5.0, 10000, 10000, 25, 3950), 50.0, 1e-9);
  CHECK(std::isnan(db::thermistorC(0.0, 5.0, 10000, 10000, 25, 3950)));  // shorted
  CHECK(std::isnan(db::thermistorC(5.0, 5.0, 10000, 10000, 25, 3950)));  // open
  CHECK_NEAR(db::rpmFromEdges(100, 500000, 1), 12000, 1e-9);
  CHECK_NEAR(db::rpmFromEdges(700, 500000, 7), 12000, 1e-9);  // 14-pole motor, electrical pulses
  CHECK_EQ(db::signExtend24(0x7FFFFF), 8388607);
  CHECK_EQ(db::signExtend24(0x800000), -8388608);
  CHECK_EQ(db::signExtend24(0xFFFFFF), -1);
  // rpm reads 0 once the pulses stop for longer than the zero time
  r.run(700);
  for (auto& l : r.all("TEL"))
    if (l.has("rpm")) rpm = l["rpm"];
  CHECK_EQ(rpm, std::string("0"));
}

TEST_CASE("firmware trips: overcurrent (any mode), brownout (armed), load cell silent -> latched, output cut") {
  {
    Rig r;
    r.handshake();
    r.arm();
    r.send("THR v=0.5000");
    r.hal.analog[db::AIN_VOLTAGE] = 120;
    r.run(50);
    r.hal.analog[db::AIN_CURRENT] = 450;  // 45 A over the 40 A limit
    r.run(30);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);  // not yet 50 ms
    r.run(40);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_OVERCURRENT);
    CHECK_EQ(lastEsc(r), (uint16_t)1000);
    const t::Line* log = r.last("LOG");
    CHECK(log && (*log)["msg"] == "trip overcurrent: output cut");
  }
  {
    Rig r;
    r.handshake();
    r.hal.analog[db::AIN_VOLTAGE] = 0;  // no ESC supply yet, disarmed: not a fault
    r.run(1000);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
    r.hal.analog[db::AIN_VOLTAGE] = 120;
    r.arm();
    r.send("THR v=0.3000");
    r.run(50);
    r.hal.analog[db::AIN_VOLTAGE] = 90;  // 9.0 V under the 9.9 V floor
    r.run(450);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
    r.run(100);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_BROWNOUT);
    CHECK(!r.fw->armed());
  }
  {
    Rig r;
    r.handshake();
    r.arm();
    r.run(100);
    r.hal.loadCellAlive = false;
    r.run(450);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_NONE);
    r.run(100);
    CHECK_EQ(r.fw->fault(), (uint8_t)db::FAULT_SENSOR);
    CHECK(!r.fw->armed());
  }
}

TEST_CASE("line handling: over-long lines dropped up to the next newline, bad checksums ignored, bad fields NAKed") {
  Rig r;
  r.handshake();
  size_t m = r.mark();
  std::string longLine(600, 'A');
  r.raw(longLine);
  r.raw(t::withCrc("ARM 77"));  // glued to the over-long line: must not be carried out
  r.raw("\n");
  r.poll();
  CHECK(r.answer(77) == nullptr);
  CHECK(!r.fw->armed());
  CHECK_EQ(r.fw->stats().overlong, 1u);
  r.raw("ARM 78*0000\n");  // wrong checksum: silence, nothing changes
  r.raw("\n");             // a bare newline is not an error
  r.poll();
  CHECK(r.answer(78) == nullptr);
  uint16_t bad = r.send("THR v=1.5000");
  uint16_t extra = r.send("ARM x=1");
  r.poll();
  CHECK_EQ(r.why(bad), std::string("bad_value"));
  CHECK_EQ(r.why(extra), std::string("bad_value"));
  CHECK(!r.fw->armed());
  // Lines split across reads anywhere still decode.
  std::string line = t::withCrc("ARM 90") + "\n";
  for (char c : line) {
    r.raw(std::string(1, c));
    r.poll();
  }
  CHECK_EQ(r.why(90), std::string("ack"));
  // At most one warning a second about bad lines.
  int warns = 0;
  for (auto& l : r.all("LOG", m))
    if (l["level"] == "warn") warns++;
  CHECK_EQ(warns, 1);
}

TEST_CASE("a full command queue answers busy; STOP and HB never wait in it") {
  db::Config c = Rig::testConfig();
  c.commandsPerPass = 1;
  Rig r(c);
  r.handshake();
  std::vector<uint16_t> seqs;
  for (int i = 0; i < DB_QUEUE_CAP + 3; i++) seqs.push_back(r.send("STATUS"));
  uint16_t extra = r.send("ARM");
  uint16_t stop = r.send("STOP");
  r.poll();
  CHECK_EQ(r.why(extra), std::string("busy"));
  CHECK_EQ(r.why(stop), std::string("ack"));
}

TEST_CASE("CALSET: sets a fitted channel's scale and offset while disarmed; unsupported for torque") {
  Rig r;
  r.handshake();
  uint16_t tq = r.send("CALSET ch=torque scale=1.000000 offset=0.000000");
  uint16_t zero = r.send("CALSET ch=current scale=0.000000 offset=0.000000");
  uint16_t ok = r.send("CALSET ch=current scale=0.200000 offset=-1.000000");
  r.hal.analog[db::AIN_CURRENT] = 35;
  r.run(50);
  CHECK_EQ(r.why(tq), std::string("unsupported"));
  CHECK_EQ(r.why(zero), std::string("bad_value"));
  CHECK_EQ(r.why(ok), std::string("ack"));
  CHECK_EQ((*r.last("TEL"))["i"], std::string("6.000"));
  r.arm();
  uint16_t armed = r.send("CALSET ch=current scale=1.000000 offset=0.000000");
  r.run(10);
  CHECK_EQ(r.why(armed), std::string("busy"));
}

TEST_CASE("ESC pulse rate and widths follow the configuration") {
  Rig r(cfgWith([](db::Config& c) {
    c.escRateHz = 400;
    c.escStopUs = 1100;
    c.escFullUs = 1900;
  }));
  CHECK_EQ(r.lines[0]["escrate"], std::string("400"));
  CHECK_EQ(lastEsc(r), (uint16_t)1100);
  r.handshake();
  r.arm();
  r.send("THR v=0.5000");
  r.run(10);
  CHECK_EQ(lastEsc(r), (uint16_t)1500);
}
