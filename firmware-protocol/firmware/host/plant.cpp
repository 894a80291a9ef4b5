#include "plant.h"

#include <math.h>

namespace host {

namespace {
constexpr double MAX_RPM = 12000;
constexpr double SPIN_UP_S = 0.12;
constexpr double THRUST_AT_MAX_N = 6.0;
constexpr double CURRENT_AT_MAX_A = 28.0;
constexpr double IDLE_A = 0.3;
constexpr double PACK_V = 12.4;
constexpr double PACK_R_OHM = 0.03;
constexpr double LOAD_CELL_OFFSET_COUNTS = 4321;  // an untared cell never reads zero
}  // namespace

Plant::Plant(const db::Config& cfg) : cfg_(cfg) {}

double Plant::throttle() const {
  // Like an ESC: no signal or a pulse at (or below) the stop width means no drive.
  if (pulseUs_ == 0 || pulseUs_ <= cfg_.escStopUs) return 0;
  double x = (double)(pulseUs_ - cfg_.escStopUs) / (double)(cfg_.escFullUs - cfg_.escStopUs);
  return x > 1 ? 1 : x;
}

void Plant::step(double dtS, uint32_t nowUs) {
  if (!started_) {
    started_ = true;
    nextConversionUs_ = nowUs;
    lastEdgeUs_ = nowUs;
  }
  double target = MAX_RPM * throttle();
  rpm_ += (target - rpm_) * (1 - exp(-dtS / SPIN_UP_S));
  revs_ += rpm_ / 60.0 * dtS;
  uint32_t p = (uint32_t)floor(revs_ * cfg_.rpmPulsesPerRev);
  if (p != pulses_) {
    pulses_ = p;
    lastEdgeUs_ = nowUs;
  }
}

double Plant::thrustN() const {
  double r = rpm_ / MAX_RPM;
  return THRUST_AT_MAX_N * r * r;
}
double Plant::currentA() const {
  double r = rpm_ / MAX_RPM;
  return IDLE_A + CURRENT_AT_MAX_A * r * r * r;
}
double Plant::voltageV() const { return PACK_V - PACK_R_OHM * currentA(); }

bool Plant::conversion(uint32_t nowUs, int32_t* counts) {
  if (!started_ || (int32_t)(nowUs - nextConversionUs_) < 0) return false;
  nextConversionUs_ += 1000000u / cfg_.loadCellSps;
  noise_ = noise_ * 1103515245u + 12345u;
  double jitter = ((double)((noise_ >> 16) & 0xFF) - 127.5) * 0.5;
  *counts = (int32_t)lround(LOAD_CELL_OFFSET_COUNTS + thrustN() / cfg_.thrust.scale + jitter);
  return true;
}

uint16_t Plant::toCounts(double pinV) const {
  double c = pinV / cfg_.adcRefV * cfg_.adcMax;
  if (c < 0) c = 0;
  if (c > cfg_.adcMax) c = cfg_.adcMax;
  return (uint16_t)lround(c);
}

uint16_t Plant::voltageCounts() const { return toCounts((voltageV() - cfg_.voltage.offset) / cfg_.voltage.scale); }
uint16_t Plant::currentCounts() const { return toCounts((currentA() - cfg_.current.offset) / cfg_.current.scale); }

uint16_t Plant::thermistorCounts() const {
  // Motor a little above room temperature, warmer with current.
  double tC = 24.0 + 0.4 * currentA();
  double r = cfg_.thermR0 * exp(cfg_.thermBeta * (1.0 / (tC + 273.15) - 1.0 / (cfg_.thermT0C + 273.15)));
  return toCounts(cfg_.adcRefV * r / (cfg_.thermFixedOhm + r));
}

}  // namespace host
