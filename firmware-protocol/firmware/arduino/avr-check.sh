#!/usr/bin/env bash
# Compiles and links the sketch for an Uno-class board (ATmega328P, 16 MHz) with the distribution's avr-gcc
# and Arduino AVR core, when they are installed (Debian: apt-get install gcc-avr avr-libc arduino-core-avr),
# and prints flash and RAM use. It proves the glue compiles for AVR and the RAM fits; it is not a test of
# behaviour on hardware. Exit 0 with a note when the toolchain is absent; non-zero when a build fails.
#   bash arduino/avr-check.sh [OUTDIR]
set -uo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
out="${1:-$here/build/avr}"
core="${ARDUINO_AVR_CORE:-/usr/share/arduino/hardware/arduino/avr}"
if ! command -v avr-g++ >/dev/null 2>&1 || [ ! -d "$core/cores/arduino" ]; then
  echo "avr check: not run (avr-g++ or the Arduino AVR core not installed)"
  exit 0
fi
mkdir -p "$out"
mcu=(-mmcu=atmega328p -DF_CPU=16000000L -DARDUINO=10807 -DARDUINO_AVR_UNO -DARDUINO_ARCH_AVR)
inc=(-I "$core/cores/arduino" -I "$core/variants/standard" -I "$here/core" -I "$here/arduino/ductbench_fw")
common=(-Os -g -ffunction-sections -fdata-sections "${mcu[@]}" "${inc[@]}")
cxxflags=(-std=gnu++11 -fno-exceptions -fno-threadsafe-statics -fno-rtti "${common[@]}")
objs=()
fail=0
build() { # src obj compiler flags...
  local src=$1 obj=$2
  shift 2
  if ! "$@" -c "$src" -o "$obj" 2>>"$out/build.log"; then
    echo "avr check: FAILED to compile $(basename "$src")" >&2
    fail=1
  fi
  objs+=("$obj")
}
: >"$out/build.log"
for f in "$core"/cores/arduino/*.c; do build "$f" "$out/core-$(basename "$f").o" avr-gcc -w "${common[@]}"; done
# This avr-gcc's float.h leaves DECIMAL_DIG out in C++ mode; the core's String class wants it (float: 9).
for f in "$core"/cores/arduino/*.cpp; do build "$f" "$out/core-$(basename "$f").o" avr-g++ -w -DDECIMAL_DIG=9 "${cxxflags[@]}"; done
for f in "$core"/cores/arduino/*.S; do build "$f" "$out/core-$(basename "$f").o" avr-gcc -x assembler-with-cpp "${common[@]}"; done
# Our code with warnings as errors, as on the host.
for f in "$here"/core/*.cpp; do build "$f" "$out/fw-$(basename "$f").o" avr-g++ -Wall -Wextra -Werror "${cxxflags[@]}"; done
printf '#include <Arduino.h>\n#include "%s"\n' "$here/arduino/ductbench_fw/ductbench_fw.ino" >"$out/sketch.cpp"
build "$out/sketch.cpp" "$out/sketch.o" avr-g++ -Wall -Wextra -Werror "${cxxflags[@]}"
if [ $fail != 0 ]; then
  cat "$out/build.log" >&2
  exit 1
fi
if ! avr-gcc -Os -Wl,--gc-sections "${mcu[@]}" -o "$out/ductbench_fw.elf" "${objs[@]}" -lm 2>>"$out/build.log"; then
  cat "$out/build.log" >&2
  echo "avr check: FAILED to link" >&2
  exit 1
fi
# text+data is flash; data+bss is static RAM (the stack comes out of what is left of the 2048 bytes).
read -r text data bss _ < <(avr-size "$out/ductbench_fw.elf" | tail -n 1)
echo "avr check: uno build links: flash $((text + data)) of 32256 bytes, static RAM $((data + bss)) of 2048 bytes"
if [ $((data + bss)) -gt 1600 ]; then
  echo "avr check: FAILED: static RAM over 1600 bytes leaves too little stack" >&2
  exit 1
fi
