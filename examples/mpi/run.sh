#!/bin/sh
# Builds (or finds, in the build directory given as the first argument) the MPI
# sharding example and runs it on 4 ranks.  Exit status: the example's (0 when every
# gathered tensor equals the single-process fill).
#   examples/mpi/run.sh [BUILD_DIR]      default BUILD_DIR: build/mpi
set -eu
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../.." && pwd)
build=${1:-$root/build/mpi}
exe=$build/examples/mpi/kindling_example_mpi_shards
if [ ! -x "$exe" ]; then
  cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DKINDLING_BUILD_TESTS=OFF \
        -DKINDLING_BUILD_BENCHMARKS=OFF -DKINDLING_BUILD_EXAMPLES=ON
  cmake --build "$build" -j2 --target kindling_example_mpi_shards
fi
[ -x "$exe" ] || { echo "run.sh: $exe was not built (is MPI installed? libopenmpi-dev, openmpi-bin)" >&2; exit 2; }
exec mpirun --oversubscribe --allow-run-as-root -np 4 "$exe"
