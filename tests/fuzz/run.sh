#!/bin/sh
# tests/fuzz/run.sh: build a libFuzzer target and run it for a given time.
#
#   tests/fuzz/run.sh TARGET SECONDS [BUILD_DIR]     TARGET: npy, spec or shape_region
#
# Builds tests/fuzz/fuzz_TARGET.cpp with clang++ -fsanitize=fuzzer,address,undefined
# (Debian: clang-14 and libclang-rt-14-dev for libFuzzer's runtime; nlohmann-json3-dev
# and libeigen3-dev for the spec target) into BUILD_DIR (default build/fuzz), copies the
# seed corpus tests/fuzz/corpus/TARGET into BUILD_DIR/corpus-TARGET (the repository's
# corpus is never written) and fuzzes for SECONDS. Crashes, leaks and timeouts are
# written to BUILD_DIR/artifacts-TARGET/; the exit status is libFuzzer's (0: no finding).
# Every finding becomes a file in tests/fuzz/regressions/TARGET/, which
# tests/fuzz/regress.sh replays (and ctest runs).
set -eu
target=${1:?usage: run.sh npy|spec|shape_region SECONDS [BUILD_DIR]}
seconds=${2:?usage: run.sh TARGET SECONDS [BUILD_DIR]}
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
build=${3:-$root/build/fuzz}
"$here/build.sh" "$target" "$build"
mkdir -p "$build/corpus-$target" "$build/artifacts-$target"
cp -n "$here/corpus/$target/"* "$build/corpus-$target/" 2>/dev/null || true
# FUZZ_FLAGS adds libFuzzer options, e.g. "-fork=1 -ignore_crashes=1" to go on past a known finding.
# shellcheck disable=SC2086
exec "$build/fuzz_$target" ${FUZZ_FLAGS:-} -max_total_time="$seconds" -timeout=10 -rss_limit_mb=2048 -max_len=65536 \
  -print_final_stats=1 -artifact_prefix="$build/artifacts-$target/" "$build/corpus-$target"
