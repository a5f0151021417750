#!/usr/bin/env bash
# The tool's files are the same bytes on a big-endian CPU: builds the `kindling` tool with
# Debian's s390x cross compiler (-static), runs it under qemu-s390x and the host's tool
# with the same commands, and compares every file byte for byte: .npy in each element
# type, a region, an orthogonal draw, and a whole model (safetensors and its manifest);
# and the big-endian tool's check, verify and audit of the host's files.
#
#   tests/digest/tool_files.sh HOST_TOOL [CROSS_CXX]
#
# HOST_TOOL is the tool built for this machine (build/test/examples/tool/kindling).
# CROSS_CXX defaults to s390x-linux-gnu-g++ (run under qemu-s390x); any Debian cross
# compiler ARCH-linux-gnu-g++ works the same way (qemu-ARCH).
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
host_tool=$(cd "$(dirname "$1")" && pwd)/$(basename "$1")
cxx=${2:-s390x-linux-gnu-g++}
arch=$(basename "$cxx" | cut -d- -f1)
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT

# The cross compiler has its own C library headers, so /usr/include cannot go on its
# path: only the header-only dependencies are linked into a directory of their own.
mkdir -p "$work/deps"
ln -s /usr/include/CLI "$work/deps/CLI"
ln -s /usr/include/nlohmann "$work/deps/nlohmann"

echo "building the tool with $cxx -O1 -static"
objs=()
for src in "$root"/examples/tool/*.cpp; do
  obj="$work/$(basename "$src" .cpp).o"
  "$cxx" -std=c++17 -O1 -Wall -Wextra -Wpedantic -Wconversion -Wshadow -Werror \
    -I"$root/include" -isystem "$work/deps" -isystem /usr/include/eigen3 -c "$src" -o "$obj"
  objs+=("$obj")
done
"$cxx" -static "${objs[@]}" -o "$work/kindling.$arch"
cross_tool() { "qemu-$arch" "$work/kindling.$arch" "$@"; }

# run_both NAME ARGS...: each tool writes OUTPUT (the -o argument, given as @) in its own
# directory; the two files must be identical.
status=0
count=0
compare() {
  local name=$1
  if cmp "$work/host/$name" "$work/cross/$name"; then
    count=$((count + 1))
  else
    echo "DIFFERENT: $name written on $arch" >&2
    status=1
  fi
}
mkdir -p "$work/host" "$work/cross"
run_both() {
  local name=$1
  shift
  (cd "$work/host" && "$host_tool" "$@" -o "$name" >/dev/null)
  (cd "$work/cross" && cross_tool "$@" -o "$name" >/dev/null)
  compare "$name"
}

for dtype in f32 f64 f16 bf16; do
  run_both "he_$dtype.npy" draw --scheme he-normal --shape 64x48 --dtype "$dtype" --seed 7
  run_both "glorot_$dtype.npy" draw --scheme glorot-uniform --shape 3x5x7 --dtype "$dtype" --seed 11
done
run_both region.npy draw --scheme lecun-normal --shape 100x80 --region 10:20,5:45 --seed 3
run_both orthogonal.npy draw --scheme orthogonal --shape 32x24 --seed 5

# A whole model: the belt's plan into safetensors and its manifest.
(cd "$work/host" && "$host_tool" assemble "$root/examples/models/conveyor_belt.json" -o belt.safetensors \
   --manifest belt.manifest.json >/dev/null)
(cd "$work/cross" && cross_tool assemble "$root/examples/models/conveyor_belt.json" -o belt.safetensors \
   --manifest belt.manifest.json >/dev/null)
compare belt.safetensors
compare belt.manifest.json

# And the other way: the big-endian tool reads the host's files (check, verify).
if ! (cd "$work/host" && cross_tool check he_f32.npy --expect he-normal >/dev/null); then
  echo "the $arch tool does not pass the host's he_f32.npy" >&2
  status=1
fi
if ! (cd "$work/host" && cross_tool verify belt.safetensors --manifest belt.manifest.json >/dev/null); then
  echo "the $arch tool does not verify the host's belt.safetensors against its manifest" >&2
  status=1
fi

# audit reads the file's little-endian values into the host's order in place, and compares
# zeros, constant and identity with a fresh fill: the same table on both CPUs, for the
# belt and for a copy whose front.conv1.bias (zeros) has its second value changed.
/usr/bin/python3 - "$work/host/belt.safetensors" "$work/host/changed.safetensors" <<'PY'
import json, struct, sys
raw = bytearray(open(sys.argv[1], "rb").read())
(n,) = struct.unpack("<Q", raw[:8])
begin = json.loads(raw[8:8 + n])["front.conv1.bias"]["data_offsets"][0]
raw[8 + n + begin + 4 + 3] ^= 0x40  # the second f32 value's top byte: 0.0 becomes 2.0
open(sys.argv[2], "wb").write(raw)
PY
for file in belt.safetensors changed.safetensors; do
  host_out=$(cd "$work/host" && "$host_tool" audit "$file" --manifest belt.manifest.json; echo "exit $?")
  cross_out=$(cd "$work/host" && cross_tool audit "$file" --manifest belt.manifest.json; echo "exit $?")
  if [ "$host_out" != "$cross_out" ]; then
    echo "the $arch tool's audit of the host's $file differs from the host tool's:" >&2
    diff <(echo "$host_out") <(echo "$cross_out") >&2 || true
    status=1
  fi
done
changed_out=$(cd "$work/host" && "$host_tool" audit changed.safetensors --manifest belt.manifest.json || true)
if ! grep -q "front.conv1.bias .*FAILED .*1 of 16 values differ" <<<"$changed_out"; then
  echo "the host tool's audit does not name the changed zero bias of changed.safetensors" >&2
  status=1
fi

if [ "$status" = 0 ]; then
  echo "tool files: all $count files written on $arch (qemu-$arch) equal the host's byte for byte;"
  echo "            the $arch tool checks, verifies and audits the host's files as the host's tool does"
fi
exit "$status"
