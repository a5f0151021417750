#!/usr/bin/env bash
# Packaging tests: install kindling to a prefix and build a consumer with
# find_package; build another consumer that embeds kindling with add_subdirectory
# and check that none of kindling's own tests or examples were configured.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
src=$(cd "$here/../.." && pwd)
work=${1:-$(mktemp -d)}
rm -rf "$work"; mkdir -p "$work"
jobs=${KINDLING_PACKAGE_JOBS:-2}  # parallel build jobs (1 on a shared machine)

# The usual way to install a header-only library works at top level with every default
# (tests and examples configured, nothing built): headers and package files are
# installed, the tool is skipped because it was not built.
cmake -S "$src" -B "$work/top" >/dev/null
cmake --install "$work/top" --prefix "$work/top-prefix" >"$work/top-install.log"
test -f "$work/top-prefix/include/kindling/kindling.hpp"
test -f "$work/top-prefix/share/cmake/kindling/kindlingConfig.cmake"
test -f "$work/top-prefix/share/pkgconfig/kindling.pc"
test ! -e "$work/top-prefix/bin/kindling"
grep -q "kindling tool not built, so not installed" "$work/top-install.log"

# The library and the command-line tool, installed (only the tool among the examples
# has an install rule, so building just that target is enough).
cmake -S "$src" -B "$work/lib" -DCMAKE_BUILD_TYPE=Release \
  -DKINDLING_BUILD_TESTS=OFF -DKINDLING_BUILD_EXAMPLES=ON -DKINDLING_BUILD_BENCHMARKS=OFF \
  -DCMAKE_INSTALL_PREFIX="$work/prefix" >/dev/null
cmake --build "$work/lib" -j"$jobs" --target kindling_tool kindling_compiled >/dev/null
cmake --install "$work/lib" >/dev/null
test -x "$work/prefix/bin/kindling"
test -f "$work/prefix/lib/libkindling_compiled.a"
test -f "$work/prefix/share/pkgconfig/kindling.pc"
test -f "$work/prefix/share/cmake/kindling/kindlingConfigVersion.cmake"

cmake -S "$here/find_package" -B "$work/fp" -DCMAKE_PREFIX_PATH="$work/prefix" >/dev/null
cmake --build "$work/fp" -j"$jobs" >/dev/null
"$work/fp/consumer"
"$work/fp/consumer_eigen"
(cd "$work/fp" && ./consumer_npz)
# The compiled mode: its users get KINDLING_COMPILED, so they must link the library's
# kernels (an undefined reference otherwise), and print what the header-only ones print.
"$work/fp/consumer_compiled"
"$work/fp/consumer_compiled_eigen"
test "$("$work/fp/consumer_compiled")" = "$("$work/fp/consumer")"
nm -C "$work/fp/CMakeFiles/consumer_compiled.dir/consumer.cpp.o" >"$work/core_compiled.syms"
if grep -q ' [TW] .*lanes_avx512' "$work/core_compiled.syms"; then
  echo "a compiled-mode consumer compiled the vector kernels itself" >&2; exit 1
fi
# The audits: the same verdicts in both modes, and the compiled consumer links the
# passes (detail::conformance, check_symmetry) instead of compiling them.
"$work/fp/consumer_audit"
test "$("$work/fp/consumer_audit_compiled")" = "$("$work/fp/consumer_audit")"
# (nm's output goes to a file first: under pipefail, grep -q closing the pipe early
# would make nm's SIGPIPE the pipeline's status.)
nm -C "$work/fp/CMakeFiles/consumer_audit_compiled.dir/consumer_audit.cpp.o" >"$work/audit_compiled.syms"
nm -C "$work/fp/CMakeFiles/consumer_audit.dir/consumer_audit.cpp.o" >"$work/audit_header_only.syms"
if grep -Eq ' [TW] .*(detail::conformance<|check_symmetry<)' "$work/audit_compiled.syms"; then
  echo "a compiled-mode consumer compiled the audits' passes itself" >&2; exit 1
fi
if ! grep -Eq ' [TW] .*check_symmetry<' "$work/audit_header_only.syms"; then
  echo "the header-only consumer should compile check_symmetry itself (is the check above looking for the right name?)" >&2; exit 1
fi

# pkg-config: compile the core consumer with the flags the .pc file gives.
PKG_CONFIG_PATH="$work/prefix/share/pkgconfig" pkg-config --exists kindling
# shellcheck disable=SC2046
c++ "$here/find_package/consumer.cpp" -o "$work/pc_consumer" \
  $(PKG_CONFIG_PATH="$work/prefix/share/pkgconfig" pkg-config --cflags --libs kindling)
"$work/pc_consumer"
# The .pc file must not choose the language standard: a C++20 user keeps C++20.
if PKG_CONFIG_PATH="$work/prefix/share/pkgconfig" pkg-config --cflags kindling | grep -q -- '-std='; then
  echo "kindling.pc forces a -std flag" >&2; exit 1
fi
# shellcheck disable=SC2046
c++ -std=c++20 "$here/find_package/consumer.cpp" -o "$work/pc_consumer20" \
  $(PKG_CONFIG_PATH="$work/prefix/share/pkgconfig" pkg-config --cflags --libs kindling)
"$work/pc_consumer20"

cmake -S "$here/subdirectory" -B "$work/sub" -DKINDLING_SOURCE_DIR="$src" >/dev/null
cmake --build "$work/sub" -j"$jobs" >/dev/null
"$work/sub/consumer"
"$work/sub/consumer_compiled"
# add_subdirectory must not build our tests, examples or benchmarks.
if find "$work/sub" -name 'kindling_test_*' -o -name 'kindling_demo' -o -name 'kindling_bench*' | grep -q .; then
  echo "add_subdirectory built kindling's own targets" >&2; exit 1
fi
# The installed tool: draw a tensor, check it, plan the built-in network.
"$work/prefix/bin/kindling" draw --scheme glorot-uniform --shape 64x32 --seed 3 --name pkg.w -o "$work/pkg.npy"
"$work/prefix/bin/kindling" check "$work/pkg.npy" --expect glorot-uniform
"$work/prefix/bin/kindling" plan >/dev/null

# The Debian package: made by CPack from the build that has the tool, installed with
# dpkg (as root, which CI is), used through find_package and pkg-config without any
# path hints, then removed.
(cd "$work/lib" && cpack -G DEB >/dev/null)
deb=$(ls "$work/lib"/kindling_*.deb)
dpkg-deb --contents "$deb" >"$work/deb-contents.txt"
grep -q './usr/bin/kindling$' "$work/deb-contents.txt"
grep -q './usr/share/pkgconfig/kindling.pc$' "$work/deb-contents.txt"
grep -q 'libkindling_compiled.a$' "$work/deb-contents.txt"
if [ "$(id -u)" != 0 ]; then
  echo "packaging: .deb built ($deb); not root, so the dpkg -i test is skipped" >&2
else
  if dpkg -s kindling >/dev/null 2>&1 || [ -e /usr/include/kindling ]; then
    echo "kindling is already installed under /usr; refusing to replace or remove it" >&2; exit 1
  fi
  dpkg -i "$deb" >/dev/null
  trap 'dpkg -r kindling >/dev/null 2>&1 || true' EXIT
  cmake -S "$here/find_package" -B "$work/deb-fp" >/dev/null
  grep -q '^kindling_DIR:PATH=/usr/share/cmake/kindling$' "$work/deb-fp/CMakeCache.txt"
  cmake --build "$work/deb-fp" -j"$jobs" >/dev/null
  "$work/deb-fp/consumer"
  "$work/deb-fp/consumer_eigen"
  "$work/deb-fp/consumer_compiled"
  (cd "$work/deb-fp" && ./consumer_npz)
  # shellcheck disable=SC2046
  c++ -std=c++20 "$here/find_package/consumer.cpp" -o "$work/deb_pc_consumer" \
    $(env -u PKG_CONFIG_PATH pkg-config --cflags --libs kindling)
  "$work/deb_pc_consumer"
  /usr/bin/kindling draw --scheme he-normal --shape 16x8 --seed 5 --name deb.w -o "$work/deb.npy"
  /usr/bin/kindling check "$work/deb.npy" --expect he-normal
  dpkg -r kindling >/dev/null
  trap - EXIT
  if [ -e /usr/include/kindling ] || [ -e /usr/bin/kindling ]; then
    echo "dpkg -r kindling left files behind" >&2; exit 1
  fi
fi
echo "packaging tests passed"
