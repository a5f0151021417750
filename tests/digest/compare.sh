#!/usr/bin/env bash
# Builds tests/digest/digest.cpp and compares its lines across toolchains.
#
#   tests/digest/compare.sh                 the four builds below; prints every output,
#                                           exits 1 if any line differs (or a build fails)
#   tests/digest/compare.sh CXX [FLAGS...]  one build; prints its lines
#
# The builds (DESIGN.md, "The reproducibility contract"):
#   g++ -O0
#   g++ -O3 -march=native
#   clang++ -O2 -march=native -ffp-contract=fast
#   aarch64-linux-gnu-g++ -O2 -static, run under qemu-aarch64
#   riscv64-linux-gnu-g++ -O2 -static, run under qemu-riscv64
#   s390x-linux-gnu-g++ -O2 -static, run under qemu-s390x (big-endian)
# and the compiled mode (KINDLING_COMPILED, the kernels from src/compiled.cpp), g++ -O2.
# A cross compiler ARCH-linux-gnu-g++ (Debian's naming) is run under qemu-ARCH.
set -euo pipefail

here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

# The warning set of kindling's own targets; -Werror so a toolchain's warning is a failure.
common=(-std=c++17 -Wall -Wextra -Wpedantic -Wconversion -Wshadow -Werror -I"$root/include")

# build_and_run OUT CXX FLAGS...: writes the program's lines to OUT.
build_and_run() {
  local out=$1 cxx=$2
  shift 2
  local exe="$work/digest.$RANDOM$RANDOM"
  "$cxx" "${common[@]}" "$@" "$here/digest.cpp" -o "$exe"
  case "$(basename "$cxx")" in
    *-linux-gnu-*) "qemu-$(basename "$cxx" | cut -d- -f1)" "$exe" >"$out" ;;
    *) "$exe" >"$out" ;;
  esac
}

if [ $# -gt 0 ]; then
  build_and_run "$work/one.txt" "$@"
  cat "$work/one.txt"
  exit 0
fi

names=("g++ -O0" "g++ -O3 -march=native" "clang++ -O2 -march=native -ffp-contract=fast"
       "aarch64-linux-gnu-g++ -O2 -static (qemu-aarch64)"
       "riscv64-linux-gnu-g++ -O2 -static (qemu-riscv64)"
       "s390x-linux-gnu-g++ -O2 -static (qemu-s390x, big-endian)"
       "g++ -O2, compiled mode (src/compiled.cpp)")
configs=("g++ -O0" "g++ -O3 -march=native" "clang++ -O2 -march=native -ffp-contract=fast"
         "aarch64-linux-gnu-g++ -O2 -static"
         "riscv64-linux-gnu-g++ -O2 -static"
         "s390x-linux-gnu-g++ -O2 -static"
         "g++ -O2 -DKINDLING_COMPILED $root/src/compiled.cpp")

status=0
for k in "${!configs[@]}"; do
  # shellcheck disable=SC2086  # each config is a command line to split
  if ! build_and_run "$work/out.$k" ${configs[$k]}; then
    echo "FAILED to build or run: ${names[$k]}" >&2
    status=1
    : >"$work/out.$k"
  fi
done

for k in "${!configs[@]}"; do
  echo "== ${names[$k]}"
  cat "$work/out.$k"
done

lines=$(wc -l <"$work/out.0")
if [ "$lines" -lt 12 ]; then
  echo "digest printed $lines lines; expected a battery of at least 12" >&2
  status=1
fi
for k in "${!configs[@]}"; do
  [ "$k" = 0 ] && continue
  if ! diff -u --label "${names[0]}" --label "${names[$k]}" "$work/out.0" "$work/out.$k"; then
    echo "DIFFERENT: ${names[$k]} against ${names[0]}" >&2
    status=1
  fi
done

# And against the frozen format-v1 lines.
if ! diff -u --label "format_v1.txt" --label "${names[0]}" "$here/format_v1.txt" "$work/out.0"; then
  echo "DIFFERENT: ${names[0]} against the frozen format-v1 lines" >&2
  status=1
fi

if [ "$status" = 0 ]; then
  echo "digest: all ${#configs[@]} builds print the same $lines lines, equal to format_v1.txt"
fi
exit "$status"
