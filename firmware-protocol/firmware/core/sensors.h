// Conversions from what the sensors give to the channel's base quantity. Pure functions: numbers in,
// numbers out, so the tests check them against worked values without hardware.
#pragma once

#include <math.h>
#include <stdint.h>

namespace db {

/** The bridge ADC shifts out 24-bit two's complement; sign-extend it to 32 bits. */
inline int32_t signExtend24(uint32_t raw) {
  raw &= 0xFFFFFFUL;
  return (raw & 0x800000UL) ? (int32_t)(raw | 0xFF000000UL) : (int32_t)raw;
}

/** Volts at the pin for raw ADC counts. */
inline double pinVolts(uint16_t counts, double refV, uint16_t maxCounts) { return (double)counts * refV / (double)maxCounts; }

/**
 * Thermistor temperature (degC) by the beta equation 1/T = 1/T0 + ln(R/R0)/B, with the thermistor from the
 * pin to ground and a fixed resistor from the reference to the pin. NAN for an open or shorted sensor.
 */
inline double thermistorC(double pinV, double refV, double fixedOhm, double r0, double t0C, double beta) {
  if (!(pinV > 0.0) || !(pinV < refV)) return NAN;
  double r = fixedOhm * pinV / (refV - pinV);
  double invT = 1.0 / (t0C + 273.15) + log(r / r0) / beta;
  return 1.0 / invT - 273.15;
}

/** Shaft speed from pulses counted between two edge times: pulses / pulsesPerRev per (dt / 60 s). */
inline double rpmFromEdges(uint32_t pulses, uint32_t dtUs, uint8_t pulsesPerRev) {
  if (dtUs == 0 || pulsesPerRev == 0) return NAN;
  return (double)pulses * 60.0e6 / ((double)pulsesPerRev * (double)dtUs);
}

}  // namespace db
