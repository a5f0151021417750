#!/bin/sh
# tests/battery/run.sh: Debian's dieharder on the raw words of a kindling stream.
#
#   tests/battery/run.sh full  [BUILD_DIR]   every test: dieharder -a -g 200 (about an hour)
#   tests/battery/run.sh short [BUILD_DIR]   a CI subset (under a minute); exit 1 on FAILED
#
# The words come from tests/battery/philox_words.cpp (built here with the system C++
# compiler into BUILD_DIR, default build/battery) with its fixed default seed and name,
# so a run is deterministic. dieharder (Brown, Eddelbuettel & Bauer; Debian package
# `dieharder`) reads them from stdin as raw 32-bit unsigned words (-g 200).
# dieharder calls a p-value FAILED when it is below 1e-6 or above 1 - 1e-6 and WEAK
# below 0.005 or above 0.995 (its defaults), so for a good generator a single test is
# WEAK with probability 1% and FAILED with probability 2e-6.
set -eu
mode=${1:-short}
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
build=${2:-$root/build/battery}
mkdir -p "$build"
${CXX:-c++} -std=c++17 -O2 -I"$root/include" "$here/philox_words.cpp" -o "$build/philox_words"
command -v dieharder >/dev/null || { echo "dieharder not found (apt-get install dieharder)" >&2; exit 2; }
case "$mode" in
  full)
    "$build/philox_words" | dieharder -a -g 200
    ;;
  short)
    # birthdays (0), 32x32 binary rank (2), runs (15),
    # STS monobit (100) and serial (102), RGB bit distribution (200, 8 bits): different
    # kinds of defect (about 30 s of CPU on one core; 7 tests with bitstream and count-the-1s took 40 s).
    out=$(mktemp)
    trap 'rm -f "$out"' EXIT
    for d in 0 2 15 100 102; do
      "$build/philox_words" | dieharder -g 200 -d "$d" | tee -a "$out"
    done
    "$build/philox_words" | dieharder -g 200 -d 200 -n 8 | tee -a "$out"
    if grep -q FAILED "$out"; then echo "battery: a test FAILED" >&2; exit 1; fi
    echo "battery: no test FAILED"
    ;;
  *) echo "usage: $0 full|short [BUILD_DIR]" >&2; exit 2 ;;
esac
