// Pins and ADC range per board family. Change a pin here (or with -D) to match your wiring; README.md has
// the same tables. A pin of -1 means "not wired".
#pragma once

#if defined(__AVR_ATmega328P__) || defined(__AVR_ATmega328__) || defined(__AVR_ATmega168__)
// Uno / Nano class, 5 V, 10-bit ADC. The ESC must be on D9: it is Timer1's output OC1A.
#define BOARD_FAMILY "avr328"
#define PIN_ESC 9
#define PIN_LOADCELL_DOUT 4
#define PIN_LOADCELL_SCK 5
#define PIN_LOADCELL_RATE 6
#define PIN_RPM 2
#define PIN_VOLTAGE A0
#define PIN_CURRENT A1
#define PIN_THERMISTOR A2
#define BOARD_ADC_REF_V 5.0
#define BOARD_ADC_MAX 1023
#elif defined(ARDUINO_ARCH_ESP32)
// ESP32 dev-board class, 3.3 V, 12-bit ADC. Analog inputs on ADC1 pins (ADC2 is unusable with the radio on).
#define BOARD_FAMILY "esp32"
#define PIN_ESC 18
#define PIN_LOADCELL_DOUT 16
#define PIN_LOADCELL_SCK 17
#define PIN_LOADCELL_RATE 19
#define PIN_RPM 27
#define PIN_VOLTAGE 34
#define PIN_CURRENT 35
#define PIN_THERMISTOR 32
#define BOARD_ADC_REF_V 3.3
#define BOARD_ADC_MAX 4095
#elif defined(ARDUINO_ARCH_RP2040)
// RP2040 board class, 3.3 V, 12-bit ADC on GP26..GP28.
#define BOARD_FAMILY "rp2040"
#define PIN_ESC 15
#define PIN_LOADCELL_DOUT 16
#define PIN_LOADCELL_SCK 17
#define PIN_LOADCELL_RATE 18
#define PIN_RPM 14
#define PIN_VOLTAGE 26
#define PIN_CURRENT 27
#define PIN_THERMISTOR 28
#define BOARD_ADC_REF_V 3.3
#define BOARD_ADC_MAX 4095
#else
#error "No pin table for this board: add one to board_pins.h and an ESC output to hal_arduino.h"
#endif

// A -D on the command line wins over the board's ADC defaults.
#ifdef DB_ADC_REF_V
#undef BOARD_ADC_REF_V
#define BOARD_ADC_REF_V DB_ADC_REF_V
#endif
#ifdef DB_ADC_MAX
#undef BOARD_ADC_MAX
#define BOARD_ADC_MAX DB_ADC_MAX
#endif
