// Build-time settings of a bench. Each may be overridden with -D on the compiler's command line (PlatformIO
// build_flags, arduino-cli --build-property) or edited here; defaultConfig() turns them into a Config, and
// validateConfig() refuses values outside what the protocol and the parts allow before the ESC line is driven.
#pragma once

#include <stdint.h>

namespace db {

// ---------------------------------------------------------------- identity
#ifndef DB_FW_NAME
#define DB_FW_NAME "ductbench-ref"
#endif
#ifndef DB_FW_VERSION
#define DB_FW_VERSION "1.0.0"
#endif

// ---------------------------------------------------------------- safety
/** Hard throttle ceiling (fraction): THR above it is refused, never clamped. */
#ifndef DB_THROTTLE_CEILING
#define DB_THROTTLE_CEILING 0.80
#endif
/** Heartbeat loss time-out; ductbench refuses a device announcing more than 300 ms. */
#ifndef DB_HEARTBEAT_TIMEOUT_MS
#define DB_HEARTBEAT_TIMEOUT_MS 300
#endif
/** Firmware's own hard current limit (A) and how long it must be exceeded (ms). */
#ifndef DB_OVERCURRENT_A
#define DB_OVERCURRENT_A 40.0
#endif
#ifndef DB_OVERCURRENT_MS
#define DB_OVERCURRENT_MS 50
#endif
/** Supply floor while armed (V; 0 disables) and how long it must be undercut (ms). 3S at 3.3 V a cell. */
#ifndef DB_BROWNOUT_V
#define DB_BROWNOUT_V 9.9
#endif
#ifndef DB_BROWNOUT_MS
#define DB_BROWNOUT_MS 500
#endif

// ---------------------------------------------------------------- ESC (servo-style pulses)
#ifndef DB_ESC_RATE_HZ
#define DB_ESC_RATE_HZ 50
#endif
#ifndef DB_ESC_STOP_US
#define DB_ESC_STOP_US 1000
#endif
#ifndef DB_ESC_FULL_US
#define DB_ESC_FULL_US 2000
#endif
/** After a fault the stop pulse is held this long, then the line is held low (no pulses at all). */
#ifndef DB_ESC_STOP_HOLD_MS
#define DB_ESC_STOP_HOLD_MS 500
#endif

// ---------------------------------------------------------------- load cell (two-wire 24-bit bridge ADC)
/** The converter's own rate, chosen by its RATE pin: 10 or 80 samples per second (its datasheet). */
#ifndef DB_LOADCELL_SPS
#define DB_LOADCELL_SPS 80
#endif
/** Newtons per count (about 1e-5 for a 5 kg cell at 2 mV/V, gain 128; calibrate with CALSET). */
#ifndef DB_LOADCELL_N_PER_COUNT
#define DB_LOADCELL_N_PER_COUNT 1.0e-5
#endif
/** No conversion for this long latches fault=sensor. */
#ifndef DB_LOADCELL_TIMEOUT_MS
#define DB_LOADCELL_TIMEOUT_MS 500
#endif

// ---------------------------------------------------------------- analog inputs
#ifndef DB_ADC_REF_V
#define DB_ADC_REF_V 5.0
#endif
#ifndef DB_ADC_MAX
#define DB_ADC_MAX 1023
#endif
#ifndef DB_ANALOG_HZ
#define DB_ANALOG_HZ 100
#endif
/** Voltage divider: bus volts per volt at the pin, (R_top + R_bottom) / R_bottom. 47k over 10k: 5.7. */
#ifndef DB_VOLT_DIVIDER
#define DB_VOLT_DIVIDER 5.7
#endif
/** Current sensor: volts at the pin for 0 A and volts per ampere (a bidirectional Hall sensor on 5 V). */
#ifndef DB_CURRENT_ZERO_V
#define DB_CURRENT_ZERO_V 2.5
#endif
#ifndef DB_CURRENT_V_PER_A
#define DB_CURRENT_V_PER_A 0.040
#endif

// ---------------------------------------------------------------- optional rpm input
#ifndef DB_RPM_FITTED
#define DB_RPM_FITTED 1
#endif
#ifndef DB_RPM_HZ
#define DB_RPM_HZ 10
#endif
/** Pulses per revolution: 1 for one reflective mark, motor poles / 2 for an electrical-phase sensor. */
#ifndef DB_RPM_PULSES_PER_REV
#define DB_RPM_PULSES_PER_REV 1
#endif
/** No pulse for this long reads as 0 rpm. */
#ifndef DB_RPM_ZERO_MS
#define DB_RPM_ZERO_MS 500
#endif

// ---------------------------------------------------------------- optional thermistor (beta equation)
#ifndef DB_TEMP_FITTED
#define DB_TEMP_FITTED 1
#endif
#ifndef DB_TEMP_HZ
#define DB_TEMP_HZ 2
#endif
#ifndef DB_THERM_R0_OHM
#define DB_THERM_R0_OHM 10000.0
#endif
#ifndef DB_THERM_T0_C
#define DB_THERM_T0_C 25.0
#endif
#ifndef DB_THERM_BETA_K
#define DB_THERM_BETA_K 3950.0
#endif
/** Fixed resistor from the reference to the pin; the thermistor goes from the pin to ground. */
#ifndef DB_THERM_FIXED_OHM
#define DB_THERM_FIXED_OHM 10000.0
#endif

/** Channel calibration: value = scale * base + offset (base per channel, see README.md). */
struct Cal {
  double scale;
  double offset;
};

struct Config {
  const char* name;
  const char* version;
  double ceiling;
  uint16_t heartbeatTimeoutMs;
  double overcurrentA;
  uint16_t overcurrentMs;
  double brownoutV;
  uint16_t brownoutMs;

  uint16_t escRateHz;
  uint16_t escStopUs;
  uint16_t escFullUs;
  uint16_t escStopHoldMs;

  bool thrustFitted;
  uint8_t loadCellSps;
  uint16_t loadCellTimeoutMs;
  Cal thrust;  // base: counts minus tare

  double adcRefV;
  uint16_t adcMax;
  bool voltageFitted;
  bool currentFitted;
  uint16_t analogHz;
  Cal voltage;  // base: volts at the pin
  Cal current;  // base: volts at the pin

  bool rpmFitted;
  uint16_t rpmHz;
  uint8_t rpmPulsesPerRev;
  uint16_t rpmZeroMs;
  Cal rpm;  // base: rpm from the pulse rate

  bool tempFitted;
  uint16_t tempHz;
  double thermR0;
  double thermT0C;
  double thermBeta;
  double thermFixedOhm;
  Cal temp;  // base: degC from the beta equation

  /** STAT at least this often. */
  uint16_t statPeriodMs;
  /** Queued commands carried out per main-loop pass, and how many may wait. */
  uint8_t commandsPerPass;
};

Config defaultConfig();

/** Null when the configuration is usable, else a flash string saying what is wrong. */
const char* validateConfig(const Config& c);

}  // namespace db
