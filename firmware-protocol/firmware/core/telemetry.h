// The telemetry scheduler: each channel sampled on its own clock, the newest sample of each kept until the
// next TEL frame, which carries only the channels that have a new sample.
#pragma once

#include <stdint.h>

#include "protocol_ids.h"

namespace db {

/** A fixed-rate clock on the wrapping microsecond counter. */
class Periodic {
 public:
  void start(uint32_t now, uint32_t periodUs) {
    period_ = periodUs;
    next_ = now + periodUs;
  }
  /** True once per period. After a stall it does not try to catch up with a burst. */
  bool due(uint32_t now) {
    if (period_ == 0 || (int32_t)(now - next_) < 0) return false;
    next_ += period_;
    if ((int32_t)(now - next_) >= 0) next_ = now + period_;
    return true;
  }
  uint32_t period() const { return period_; }

 private:
  uint32_t next_ = 0;
  uint32_t period_ = 0;
};

class TelemetryScheduler {
 public:
  void start(uint32_t now, uint32_t framePeriodUs) {
    frame_.start(now, framePeriodUs);
    pending_ = 0;
  }
  void put(uint8_t ch, double v) {
    value_[ch] = v;
    pending_ |= (uint8_t)(1u << ch);
  }
  /** Channels with a sample since the last frame. */
  uint8_t pending() const { return pending_; }
  double value(uint8_t ch) const { return value_[ch]; }
  /** True when a frame is due and has something to carry; the caller sends it and then calls sent(). */
  bool frameDue(uint32_t now) {
    if (!due_) due_ = frame_.due(now);
    return due_ && pending_ != 0;
  }
  void sent() {
    pending_ = 0;
    due_ = false;
  }
  void clear() { pending_ = 0; }
  uint32_t framePeriodUs() const { return frame_.period(); }

 private:
  Periodic frame_;
  bool due_ = false;
  uint8_t pending_ = 0;
  double value_[CH_COUNT] = {};
};

}  // namespace db
