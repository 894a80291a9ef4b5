#!/usr/bin/env bash
# Assembles a self-contained Arduino sketch folder (the .ino, its board files and a copy of core/) for
# arduino-cli or the Arduino IDE, which compile only what is inside the sketch folder.
#   bash arduino/stage-sketch.sh [OUT]      (default: build/sketch/ductbench_fw)
set -euo pipefail
here="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
out="${1:-$here/build/sketch/ductbench_fw}"
mkdir -p "$out"
cp "$here"/arduino/ductbench_fw/*.ino "$here"/arduino/ductbench_fw/*.h "$out"/
cp "$here"/core/*.h "$here"/core/*.cpp "$out"/
echo "sketch staged in $out"
