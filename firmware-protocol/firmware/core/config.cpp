#include "config.h"

#include <math.h>

#include "codec.h"
#include "portable.h"

namespace db {

Config defaultConfig() {
  Config c;
  c.name = DB_FW_NAME;
  c.version = DB_FW_VERSION;
  c.ceiling = DB_THROTTLE_CEILING;
  c.heartbeatTimeoutMs = DB_HEARTBEAT_TIMEOUT_MS;
  c.overcurrentA = DB_OVERCURRENT_A;
  c.overcurrentMs = DB_OVERCURRENT_MS;
  c.brownoutV = DB_BROWNOUT_V;
  c.brownoutMs = DB_BROWNOUT_MS;
  c.escRateHz = DB_ESC_RATE_HZ;
  c.escStopUs = DB_ESC_STOP_US;
  c.escFullUs = DB_ESC_FULL_US;
  c.escStopHoldMs = DB_ESC_STOP_HOLD_MS;
  c.thrustFitted = true;
  c.loadCellSps = DB_LOADCELL_SPS;
  c.loadCellTimeoutMs = DB_LOADCELL_TIMEOUT_MS;
  c.thrust = Cal{DB_LOADCELL_N_PER_COUNT, 0.0};
  c.adcRefV = DB_ADC_REF_V;
  c.adcMax = DB_ADC_MAX;
  c.voltageFitted = true;
  c.currentFitted = true;
  c.analogHz = DB_ANALOG_HZ;
  c.voltage = Cal{DB_VOLT_DIVIDER, 0.0};
  c.current = Cal{1.0 / DB_CURRENT_V_PER_A, -DB_CURRENT_ZERO_V / DB_CURRENT_V_PER_A};
  c.rpmFitted = DB_RPM_FITTED != 0;
  c.rpmHz = DB_RPM_HZ;
  c.rpmPulsesPerRev = DB_RPM_PULSES_PER_REV;
  c.rpmZeroMs = DB_RPM_ZERO_MS;
  c.rpm = Cal{1.0, 0.0};
  c.tempFitted = DB_TEMP_FITTED != 0;
  c.tempHz = DB_TEMP_HZ;
  c.thermR0 = DB_THERM_R0_OHM;
  c.thermT0C = DB_THERM_T0_C;
  c.thermBeta = DB_THERM_BETA_K;
  c.thermFixedOhm = DB_THERM_FIXED_OHM;
  c.temp = Cal{1.0, 0.0};
  c.statPeriodMs = 200;
  c.commandsPerPass = 4;
  return c;
}

namespace {

bool isToken(const char* s) {
  if (!s) return false;
  size_t n = strlen(s);
  if (n < 1 || n > 32) return false;
  for (size_t i = 0; i < n; i++)
    if (!isTokenChar(s[i])) return false;
  return true;
}

bool usableScale(const Cal& c) { return isfinite(c.scale) && isfinite(c.offset) && c.scale != 0.0; }

}  // namespace

const char* validateConfig(const Config& c) {
  if (!isToken(c.name)) return FW_STR("firmware name must be 1..32 token characters");
  if (!isToken(c.version)) return FW_STR("firmware version must be 1..32 token characters");
  if (!(c.ceiling >= 0.0 && c.ceiling <= 1.0)) return FW_STR("throttle ceiling must be 0..1");
  // IDENT announces thrmax with 3 decimals; a finer ceiling would enforce a number the host never sees.
  if (fabs(c.ceiling * 1000.0 - round(c.ceiling * 1000.0)) > 1e-6) return FW_STR("throttle ceiling must be a multiple of 0.001");
  // The protocol's floor is 20 ms; ductbench refuses a device that would keep a motor turning longer than 300 ms.
  if (c.heartbeatTimeoutMs < 20 || c.heartbeatTimeoutMs > DEFAULT_HEARTBEAT_TIMEOUT_MS) return FW_STR("heartbeat time-out must be 20..300 ms");
  if (!(c.overcurrentA > 0.0)) return FW_STR("overcurrent limit must be above 0 A");
  if (!(c.brownoutV >= 0.0)) return FW_STR("brownout floor must be 0 (off) or above");
  // Servo-style ESC signal (common practice): 50..490 Hz, about 1000 us stop to 2000 us full.
  if (c.escRateHz < 50 || c.escRateHz > 490) return FW_STR("ESC rate must be 50..490 Hz");
  if (c.escStopUs < 500 || c.escFullUs > 2500 || c.escStopUs >= c.escFullUs) return FW_STR("ESC pulses must be 500 <= stop < full <= 2500 us");
  if (1000000UL / c.escRateHz < (uint32_t)c.escFullUs + 20u) return FW_STR("ESC rate too high for the full-throttle pulse");
  if (c.thrustFitted) {
    // The bridge ADC converts at 10 or 80 samples per second, chosen by its RATE pin (its datasheet).
    if (c.loadCellSps != 10 && c.loadCellSps != 80) return FW_STR("load cell rate must be 10 or 80 samples/s");
    if ((uint32_t)c.loadCellTimeoutMs < 2000u / c.loadCellSps + 1u) return FW_STR("load cell time-out shorter than two samples");
    if (!usableScale(c.thrust)) return FW_STR("thrust scale must be finite and non-zero");
  }
  if (c.voltageFitted || c.currentFitted || c.tempFitted) {
    if (!(c.adcRefV > 0.0) || c.adcMax < 255) return FW_STR("ADC reference or range not usable");
  }
  if ((c.voltageFitted || c.currentFitted) && (c.analogHz < 1 || c.analogHz > 1000)) return FW_STR("analog rate must be 1..1000 Hz");
  if (c.voltageFitted && !usableScale(c.voltage)) return FW_STR("voltage scale must be finite and non-zero");
  if (c.currentFitted && !usableScale(c.current)) return FW_STR("current scale must be finite and non-zero");
  if (c.rpmFitted && (c.rpmHz < 1 || c.rpmHz > 200 || c.rpmPulsesPerRev < 1 || c.rpmZeroMs < 50 || !usableScale(c.rpm)))
    return FW_STR("rpm settings not usable");
  if (c.tempFitted && (c.tempHz < 1 || c.tempHz > 50 || !(c.thermR0 > 0) || !(c.thermBeta > 0) || !(c.thermFixedOhm > 0) || !usableScale(c.temp)))
    return FW_STR("thermistor settings not usable");
  if (c.statPeriodMs < 20 || c.statPeriodMs > 200) return FW_STR("STAT period must be 20..200 ms");
  if (c.commandsPerPass < 1) return FW_STR("at least one command per pass");
  if (!c.thrustFitted && !c.voltageFitted && !c.currentFitted && !c.rpmFitted && !c.tempFitted) return FW_STR("no channel fitted");
  return nullptr;
}

}  // namespace db
