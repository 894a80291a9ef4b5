// The thin hardware abstraction the core runs on. Everything board-specific sits behind it: the Arduino
// glue (arduino/) implements it over the Arduino APIs, the host build (host/) over a tty and a simulated
// plant, and the tests over a scripted fake with a hand-driven clock.
#pragma once

#include <stddef.h>
#include <stdint.h>

namespace db {

/** Analog inputs the core reads. */
enum AnalogInput : uint8_t { AIN_VOLTAGE, AIN_CURRENT, AIN_TEMP };

/** Why the controller started, as far as the board can tell. Anything but POWER_ON latches fault=reset. */
enum BootCause : uint8_t { BOOT_POWER_ON, BOOT_RESET };

class Hal {
 public:
  /** Microseconds since start, wrapping at 2^32 (Arduino micros()). */
  virtual uint32_t micros() = 0;
  /** Reads up to max received bytes without waiting; returns how many. */
  virtual size_t read(uint8_t* buf, size_t max) = 0;
  /** Bytes that can be written now without blocking (telemetry waits for room; answers are never held back). */
  virtual size_t writeRoom() = 0;
  virtual void write(const uint8_t* buf, size_t n) = 0;
  /**
   * ESC signal: a pulse of pulseUs microseconds repeated at the configured rate, or, when pulseUs is 0, no
   * pulses at all (the line held low). Called only when the width changes.
   */
  virtual void escWrite(uint16_t pulseUs) = 0;
  /** When the bridge ADC has a new conversion: reads it (sign-extended 24-bit counts) and returns true. */
  virtual bool loadCellRead(int32_t* counts) = 0;
  /** Raw ADC counts of one analog input (0..Config::adcMax). */
  virtual uint16_t analogRead(AnalogInput input) = 0;
  /** Rpm input: pulses counted since start and the time of the latest pulse edge (micros). */
  virtual void rpmRead(uint32_t* count, uint32_t* lastEdgeUs) = 0;
  /** Restarts the hardware watchdog's count-down; called once per main-loop pass. */
  virtual void watchdogKick() = 0;
  /** A line for people debugging the firmware (never the protocol port). Text is a RAM string. */
  virtual void debug(const char* text) { (void)text; }

 protected:
  ~Hal() = default;
};

}  // namespace db
