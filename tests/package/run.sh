#!/usr/bin/env bash
# Packaging tests: install kindling to a prefix and build a consumer with
# find_package; build another consumer that embeds kindling with add_subdirectory
# and check that none of kindling's own tests or examples were configured.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
src=$(cd "$here/../.." && pwd)
work=${1:-$(mktemp -d)}
rm -rf "$work"; mkdir -p "$work"

# The library and the command-line tool, installed (only the tool among the examples
# has an install rule, so building just that target is enough).
cmake -S "$src" -B "$work/lib" -DCMAKE_BUILD_TYPE=Release \
  -DKINDLING_BUILD_TESTS=OFF -DKINDLING_BUILD_EXAMPLES=ON -DKINDLING_BUILD_BENCHMARKS=OFF \
  -DCMAKE_INSTALL_PREFIX="$work/prefix" >/dev/null
cmake --build "$work/lib" -j2 --target kindling_tool >/dev/null
cmake --install "$work/lib" >/dev/null
test -x "$work/prefix/bin/kindling"
test -f "$work/prefix/share/pkgconfig/kindling.pc"
test -f "$work/prefix/share/cmake/kindling/kindlingConfigVersion.cmake"

cmake -S "$here/find_package" -B "$work/fp" -DCMAKE_PREFIX_PATH="$work/prefix" >/dev/null
cmake --build "$work/fp" -j2 >/dev/null
"$work/fp/consumer"
"$work/fp/consumer_eigen"

# pkg-config: compile the core consumer with the flags the .pc file gives.
PKG_CONFIG_PATH="$work/prefix/share/pkgconfig" pkg-config --exists kindling
# shellcheck disable=SC2046
c++ "$here/find_package/consumer.cpp" -o "$work/pc_consumer" \
  $(PKG_CONFIG_PATH="$work/prefix/share/pkgconfig" pkg-config --cflags --libs kindling)
"$work/pc_consumer"

cmake -S "$here/subdirectory" -B "$work/sub" -DKINDLING_SOURCE_DIR="$src" >/dev/null
cmake --build "$work/sub" -j2 >/dev/null
"$work/sub/consumer"
# add_subdirectory must not build our tests, examples or benchmarks.
if find "$work/sub" -name 'kindling_test_*' -o -name 'kindling_demo' -o -name 'kindling_bench*' | grep -q .; then
  echo "add_subdirectory built kindling's own targets" >&2; exit 1
fi
# The installed tool: draw a tensor, check it, plan the built-in network.
"$work/prefix/bin/kindling" draw --scheme glorot-uniform --shape 64x32 --seed 3 --name pkg.w -o "$work/pkg.npy"
"$work/prefix/bin/kindling" check "$work/pkg.npy" --expect glorot-uniform
"$work/prefix/bin/kindling" plan >/dev/null
echo "packaging tests passed"
