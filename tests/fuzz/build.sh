#!/bin/sh
# tests/fuzz/build.sh TARGET BUILD_DIR: builds BUILD_DIR/fuzz_TARGET (libFuzzer, ASan,
# UBSan, every UBSan report fatal). Used by run.sh and regress.sh.
set -eu
target=$1
build=$2
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
mkdir -p "$build"
extra=""
[ "$target" = shape_region ] && extra="$root/examples/tool/common.cpp"
# shellcheck disable=SC2086
${FUZZ_CXX:-clang++} -std=c++17 -O1 -g -fsanitize=fuzzer,address,undefined -fno-sanitize-recover=all \
  -Wall -Wextra -Wpedantic -Wconversion -Wshadow -Werror \
  -I"$root/include" -isystem /usr/include/eigen3 "$here/fuzz_$target.cpp" $extra -o "$build/fuzz_$target"
