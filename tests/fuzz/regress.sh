#!/bin/sh
# tests/fuzz/regress.sh [BUILD_DIR]: replays the seed corpus and every saved finding
# (tests/fuzz/regressions/TARGET/*) through each fuzz target once; exit 1 if any input
# crashes. Run by ctest as "reliability: fuzz regressions" when clang's libFuzzer is there.
set -eu
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
build=${1:-$root/build/fuzz}
for target in npy spec shape_region; do
  "$here/build.sh" "$target" "$build"
  set -- "$here/corpus/$target"/*
  [ -d "$here/regressions/$target" ] && set -- "$@" "$here/regressions/$target"/*
  "$build/fuzz_$target" -runs=0 "$@" >"$build/regress-$target.log" 2>&1 || {
    cat "$build/regress-$target.log"; echo "fuzz regression: $target failed" >&2; exit 1; }
  echo "fuzz regression: $target ok ($# inputs)"
done
