// The HAL over the Arduino APIs, one small block per board family where the APIs differ (ESC pulse
// generation, watchdog, reset cause). This file cannot be compiled in the ductbench repository's CI (no
// board toolchain there): it is kept short and plain so it can be checked by reading, and README.md lists
// what to verify on the bench the first time, propeller off.
#pragma once

#include <Arduino.h>

#include "board_pins.h"
#include "firmware.h"
#include "sensors.h"

#if defined(__AVR__)
#include <avr/io.h>
#include <avr/wdt.h>
#elif defined(ARDUINO_ARCH_ESP32)
#include <esp_system.h>
#include <esp_task_wdt.h>
#elif defined(ARDUINO_ARCH_RP2040)
#include <hardware/clocks.h>
#include <hardware/gpio.h>
#include <hardware/pwm.h>
#include <hardware/watchdog.h>
#endif

#if defined(ARDUINO_ARCH_ESP32)
#define DB_ISR_ATTR IRAM_ATTR
#else
#define DB_ISR_ATTR
#endif

/** Hardware watchdog time-out: shorter than the heartbeat time-out, so a hung loop cannot outlast it. */
#ifndef DB_WATCHDOG_MS
#define DB_WATCHDOG_MS 250
#endif

#if defined(__AVR__)
// The reset flags must be read before anything else runs, and cleared, or a watchdog reset loops (the
// pattern given in the avr-libc watchdog documentation).
uint8_t db_mcusr_at_boot __attribute__((section(".noinit")));
void db_save_mcusr() __attribute__((naked, used, section(".init3")));
void db_save_mcusr() {
  db_mcusr_at_boot = MCUSR;
  MCUSR = 0;
  wdt_disable();
}
#endif

namespace {
volatile uint32_t g_rpmCount = 0;
volatile uint32_t g_rpmEdgeUs = 0;
void DB_ISR_ATTR onRpmEdge() {
  g_rpmCount++;
  g_rpmEdgeUs = micros();
}
}  // namespace

class ArduinoHal : public db::Hal {
 public:
  /** First thing in setup(): the ESC line starts at the stop pulse before anything else can go wrong. */
  void beginEsc(const db::Config& cfg) {
    periodUs_ = 1000000UL / cfg.escRateHz;
#if defined(__AVR__)
    // Timer1, fast PWM with TOP in ICR1 (mode 14), prescaler 8: 0.5 us ticks at 16 MHz, 50..490 Hz fit 16 bits.
    pinMode(PIN_ESC, OUTPUT);
    digitalWrite(PIN_ESC, LOW);
    TCCR1A = _BV(WGM11);
    TCCR1B = _BV(WGM13) | _BV(WGM12) | _BV(CS11);
    ICR1 = (uint16_t)(periodUs_ * TICKS_PER_US - 1);
#elif defined(ARDUINO_ARCH_ESP32)
#if ESP_ARDUINO_VERSION_MAJOR >= 3
    ledcAttach(PIN_ESC, cfg.escRateHz, 16);
#else
    ledcSetup(0, cfg.escRateHz, 16);
    ledcAttachPin(PIN_ESC, 0);
#endif
#elif defined(ARDUINO_ARCH_RP2040)
    // 1 MHz PWM counter: the level is the pulse width in microseconds.
    gpio_set_function(PIN_ESC, GPIO_FUNC_PWM);
    slice_ = pwm_gpio_to_slice_num(PIN_ESC);
    pwm_set_clkdiv(slice_, (float)clock_get_hz(clk_sys) / 1000000.0f);
    pwm_set_wrap(slice_, (uint16_t)(periodUs_ - 1));
    pwm_set_enabled(slice_, true);
#endif
    escWrite(cfg.escStopUs);
  }

  void begin(const db::Config& cfg) {
    pinMode(PIN_LOADCELL_DOUT, INPUT);
    pinMode(PIN_LOADCELL_SCK, OUTPUT);
    digitalWrite(PIN_LOADCELL_SCK, LOW);  // SCK held high for over 60 us powers the converter down
#if PIN_LOADCELL_RATE >= 0
    // RATE high selects 80 samples/s, low 10 (the converter's datasheet; from memory). Boards that tie RATE
    // on the module itself ignore this pin: then set DB_LOADCELL_SPS to match the module.
    pinMode(PIN_LOADCELL_RATE, OUTPUT);
    digitalWrite(PIN_LOADCELL_RATE, cfg.loadCellSps == 80 ? HIGH : LOW);
#endif
#if !defined(__AVR__)
    analogReadResolution(12);
#endif
    if (cfg.rpmFitted && PIN_RPM >= 0) {
      pinMode(PIN_RPM, INPUT_PULLUP);
      attachInterrupt(digitalPinToInterrupt(PIN_RPM), onRpmEdge, FALLING);
    }
    // An empty transmit buffer is "room" even for a line longer than the buffer (small boards have 64 bytes).
    txEmptyLevel_ = Serial.availableForWrite();
#if defined(__AVR__)
    wdt_enable(WDTO_250MS);
#elif defined(ARDUINO_ARCH_ESP32)
#if ESP_ARDUINO_VERSION_MAJOR >= 3
    esp_task_wdt_config_t wdt = {DB_WATCHDOG_MS, 0, true};
    esp_task_wdt_reconfigure(&wdt);
#else
    esp_task_wdt_init(1, true);  // whole seconds only on this core version
#endif
    esp_task_wdt_add(NULL);
#elif defined(ARDUINO_ARCH_RP2040)
    watchdog_enable(DB_WATCHDOG_MS, true);
#endif
  }

  db::BootCause bootCause() const {
#if defined(__AVR__)
    // Only a flagged power-on is a power-on; flags cleared by a bootloader read as a restart (the safe side).
    return (db_mcusr_at_boot & _BV(PORF)) ? db::BOOT_POWER_ON : db::BOOT_RESET;
#elif defined(ARDUINO_ARCH_ESP32)
    return esp_reset_reason() == ESP_RST_POWERON ? db::BOOT_POWER_ON : db::BOOT_RESET;
#elif defined(ARDUINO_ARCH_RP2040)
    return watchdog_caused_reboot() ? db::BOOT_RESET : db::BOOT_POWER_ON;
#endif
  }

  uint32_t micros() override { return ::micros(); }

  size_t read(uint8_t* buf, size_t max) override {
    size_t n = 0;
    while (n < max && Serial.available() > 0) buf[n++] = (uint8_t)Serial.read();
    return n;
  }

  size_t writeRoom() override {
    int room = Serial.availableForWrite();
    if (room >= txEmptyLevel_) return 1024;
    return room > 0 ? (size_t)room : 0;
  }

  void write(const uint8_t* buf, size_t n) override { Serial.write(buf, n); }

  void escWrite(uint16_t pulseUs) override {
#if defined(__AVR__)
    if (pulseUs == 0) {
      TCCR1A &= (uint8_t)~_BV(COM1A1);  // disconnect the timer: the pin is a plain low output
      digitalWrite(PIN_ESC, LOW);
    } else {
      OCR1A = (uint16_t)(pulseUs * TICKS_PER_US);
      TCCR1A |= _BV(COM1A1);
    }
#elif defined(ARDUINO_ARCH_ESP32)
    uint32_t duty = (uint32_t)(((uint64_t)pulseUs * 65536u) / periodUs_);  // 0 is a constant low
#if ESP_ARDUINO_VERSION_MAJOR >= 3
    ledcWrite(PIN_ESC, duty);
#else
    ledcWrite(0, duty);
#endif
#elif defined(ARDUINO_ARCH_RP2040)
    pwm_set_gpio_level(PIN_ESC, pulseUs);  // 0 is a constant low
#endif
  }

  bool loadCellRead(int32_t* counts) override {
    if (digitalRead(PIN_LOADCELL_DOUT) != LOW) return false;  // DOUT low: a conversion is ready
    uint32_t raw = 0;
    // 24 data bits, MSB first, then one more clock for channel A at gain 128 next time. Interrupts are held
    // off for the ~50 us this takes: a clock pulse stretched past 60 us would power the converter down.
    noInterrupts();
    for (uint8_t i = 0; i < 25; i++) {
      digitalWrite(PIN_LOADCELL_SCK, HIGH);
      delayMicroseconds(1);
      if (i < 24) raw = (raw << 1) | (digitalRead(PIN_LOADCELL_DOUT) == HIGH ? 1u : 0u);
      digitalWrite(PIN_LOADCELL_SCK, LOW);
      delayMicroseconds(1);
    }
    interrupts();
    *counts = db::signExtend24(raw);
    return true;
  }

  uint16_t analogRead(db::AnalogInput input) override {
    switch (input) {
      case db::AIN_VOLTAGE: return (uint16_t)::analogRead(PIN_VOLTAGE);
      case db::AIN_CURRENT: return (uint16_t)::analogRead(PIN_CURRENT);
      case db::AIN_TEMP: return (uint16_t)::analogRead(PIN_THERMISTOR);
    }
    return 0;
  }

  void rpmRead(uint32_t* count, uint32_t* lastEdgeUs) override {
    noInterrupts();
    *count = g_rpmCount;
    *lastEdgeUs = g_rpmEdgeUs;
    interrupts();
  }

  void watchdogKick() override {
#if defined(__AVR__)
    wdt_reset();
#elif defined(ARDUINO_ARCH_ESP32)
    esp_task_wdt_reset();
#elif defined(ARDUINO_ARCH_RP2040)
    watchdog_update();
#endif
  }

 private:
#if defined(__AVR__)
  static constexpr uint32_t TICKS_PER_US = F_CPU / 8000000UL;
#endif
#if defined(ARDUINO_ARCH_RP2040)
  uint slice_ = 0;
#endif
  uint32_t periodUs_ = 20000;
  int txEmptyLevel_ = 1;
};
