// A tiny simulated bench for the host build: the ESC signal in, a motor and propeller with a first-order
// spin-up, and what the sensors would report (bridge ADC counts, divider and current-sensor pin voltages,
// rpm pulses, a thermistor). Just enough physics to make the numbers move the right way; the virtual bench
// in server/sim is the detailed model.
#pragma once

#include <stdint.h>

#include "../core/config.h"

namespace host {

class Plant {
 public:
  explicit Plant(const db::Config& cfg);
  /** ESC signal: pulse width in us, 0 for no pulses. */
  void setPulse(uint16_t us) { pulseUs_ = us; }
  void step(double dtS, uint32_t nowUs);

  /** True when the bridge ADC finished a conversion since the last call (at its own rate). */
  bool conversion(uint32_t nowUs, int32_t* counts);
  uint16_t voltageCounts() const;
  uint16_t currentCounts() const;
  uint16_t thermistorCounts() const;
  void rpmPulses(uint32_t* count, uint32_t* lastEdgeUs) const {
    *count = pulses_;
    *lastEdgeUs = lastEdgeUs_;
  }

  double throttle() const;
  double rpm() const { return rpm_; }
  double thrustN() const;
  double currentA() const;
  double voltageV() const;

 private:
  uint16_t toCounts(double pinV) const;

  db::Config cfg_;
  uint16_t pulseUs_ = 0;
  double rpm_ = 0;
  double revs_ = 0;
  uint32_t pulses_ = 0;
  uint32_t lastEdgeUs_ = 0;
  uint32_t nextConversionUs_ = 0;
  bool started_ = false;
  uint32_t noise_ = 12345;
};

}  // namespace host
