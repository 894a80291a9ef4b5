// ductbench reference firmware for Arduino-framework boards. All protocol and safety logic is in the
// portable core (firmware.h and friends); this sketch only wires it to the board through ArduinoHal.
// Settings: config.h (or -D flags); pins: board_pins.h. Read README.md before powering the ESC.

#include "board_pins.h"
#include "config.h"
#include "firmware.h"
#include "hal_arduino.h"

namespace {

db::Config boardConfig() {
  db::Config c = db::defaultConfig();
  c.adcRefV = BOARD_ADC_REF_V;
  c.adcMax = BOARD_ADC_MAX;
  return c;
}

// Static objects, no heap: the whole firmware state is laid out at link time. The firmware keeps its own
// copy of the configuration; there is no second one (RAM is 2 KiB on the smallest boards).
ArduinoHal g_hal;
db::Firmware g_fw(g_hal, boardConfig());

}  // namespace

void setup() {
  g_hal.beginEsc(g_fw.config());  // stop pulse before anything else
  Serial.begin(115200);
  const char* problem = db::validateConfig(g_fw.config());
  if (problem) {
    // A bench set up wrong never drives the ESC: no pulses at all, and a plain-text complaint once a second
    // (the host reports it as "not a ductbench device"). No watchdog either, so it stays here.
    g_hal.escWrite(0);
    while (true) {
      Serial.print(F("ductbench-ref: configuration refused: "));
      char c;
      for (const char* p = problem; (c = db::flashChar(p)) != 0; p++) Serial.write(c);
      Serial.println();
      delay(1000);
    }
  }
  g_hal.begin(g_fw.config());
  g_fw.boot(g_hal.bootCause());
}

void loop() { g_fw.poll(); }
