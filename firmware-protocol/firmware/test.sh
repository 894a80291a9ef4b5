#!/usr/bin/env bash
# Builds the reference firmware's portable core with the host's g++ and runs its tests against the shared
# conformance vectors, plain and under AddressSanitizer/UndefinedBehaviorSanitizer; also builds the host
# binary (build/ductbench-fw-host) that test/firmware.test.ts runs behind a pseudo-terminal, and checks
# that the core still compiles as C++11 (the Arduino AVR core's default dialect); where avr-gcc and the
# Arduino AVR core are installed, also compiles and links the sketch for an Uno (arduino/avr-check.sh).
# Exits non-zero on any
# failure; a missing compiler is a failure, never a skip.
#
#   bash firmware-protocol/firmware/test.sh        (build output in firmware-protocol/firmware/build/)
#   DB_FW_BUILD=/tmp/x bash .../test.sh            (elsewhere)
#   DB_FW_NO_SANITIZE=1 bash .../test.sh           (skip the sanitizer build)
set -uo pipefail

here="$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)"
out="${DB_FW_BUILD:-$here/build}"
cxx="${CXX:-g++}"

if ! command -v "$cxx" >/dev/null 2>&1; then
  echo "firmware test: FAILED: C++ compiler '$cxx' not found. Install g++ (Debian/Ubuntu: apt-get install g++) or set CXX." >&2
  exit 1
fi
if ! command -v node >/dev/null 2>&1; then
  echo "firmware test: FAILED: node not found (needed to read firmware-protocol/vectors/v1.json)." >&2
  exit 1
fi
mkdir -p "$out" || exit 1
start=$(date +%s.%N)

node "$here/tools/vectors-to-text.mjs" "$here/../vectors/v1.json" >"$out/vectors.txt" || {
  echo "firmware test: FAILED: could not convert the conformance vectors" >&2
  exit 1
}

flags=(-std=c++17 -Wall -Wextra -Werror -O2)
core=("$here"/core/*.cpp)
tests=("$here"/tests/*.cpp)
hostsrc=("$here"/host/*.cpp)

# Three builds side by side (a 2-core machine finishes them in about the time of the slowest).
"$cxx" "${flags[@]}" -o "$out/fw-tests" "${core[@]}" "${tests[@]}" 2>"$out/build-tests.log" &
p_tests=$!
"$cxx" "${flags[@]}" -o "$out/ductbench-fw-host" "${core[@]}" "${hostsrc[@]}" 2>"$out/build-host.log" &
p_host=$!
p_san=
if [ "${DB_FW_NO_SANITIZE:-0}" != 1 ]; then
  "$cxx" "${flags[@]}" -O1 -g -fsanitize=address,undefined -fno-sanitize-recover=all -fno-omit-frame-pointer \
    -o "$out/fw-tests-san" "${core[@]}" "${tests[@]}" 2>"$out/build-san.log" &
  p_san=$!
fi

fail=0
check_build() {
  if ! wait "$1"; then
    echo "firmware test: FAILED: $2 did not build:" >&2
    cat "$3" >&2
    fail=1
  fi
}
check_build $p_tests "the test program" "$out/build-tests.log"
check_build $p_host "the host firmware" "$out/build-host.log"
[ -n "$p_san" ] && check_build $p_san "the sanitizer test program" "$out/build-san.log"
for f in "${core[@]}"; do
  if ! "$cxx" -std=gnu++11 -Wall -Wextra -Werror -fsyntax-only "$f" 2>>"$out/build-cxx11.log"; then
    echo "firmware test: FAILED: $(basename "$f") is not valid C++11 (the Arduino AVR default):" >&2
    cat "$out/build-cxx11.log" >&2
    fail=1
  fi
done
built=$(date +%s.%N)
[ $fail = 0 ] || exit 1

echo "firmware: core, tests and host binary built in $(printf '%.1f' "$(echo "$built - $start" | bc)") s"
DB_VECTORS="$out/vectors.txt" "$out/fw-tests" || fail=1
if [ -n "$p_san" ]; then
  echo "firmware: again under address and undefined-behaviour sanitizers"
  DB_VECTORS="$out/vectors.txt" ASAN_OPTIONS=detect_leaks=1 UBSAN_OPTIONS=print_stacktrace=1 "$out/fw-tests-san" >"$out/san.log" 2>&1 || {
    cat "$out/san.log" >&2
    fail=1
  }
  tail -n 1 "$out/san.log"
fi
# The sketch for an Uno-class board, when the distribution's AVR toolchain is installed (optional here).
bash "$here/arduino/avr-check.sh" "$out/avr" || fail=1
if [ $fail != 0 ]; then
  echo "firmware test: FAILED" >&2
  exit 1
fi
echo "firmware test: all passed in $(printf '%.1f' "$(echo "$(date +%s.%N) - $start" | bc)") s"
