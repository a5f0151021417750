// Sharded initialization over MPI: each rank fills only its own block of rows of a
// large weight -- the blocks are uneven -- and rank 0 gathers them (MPI_Gatherv) and
// checks that the gathered tensor equals, byte for byte, the same weight filled whole
// by a single process.  This is kindling's reproducibility contract at work: a value
// depends on (seed, parameter name, scheme, full shape, element type), never on which
// process or thread wrote it.
//
// Two parameters of a pump-monitoring encoder: a float He-normal weight [1003, 517]
// and a double Glorot-uniform weight [777, 300].  With 4 ranks the 1003 rows split as
// 251, 251, 251, 250 and the 777 rows as 195, 194, 194, 194.  Exit status 1 (on every
// rank) when a gathered tensor differs.  With --flip-one-byte the last rank flips one
// byte of its shard before sending, to show that the check catches it.
//
//   mpirun --oversubscribe -np 4 ./kindling_example_mpi_shards [--flip-one-byte]
#include <mpi.h>

#include <cstdint>
#include <cstdio>
#include <cstring>
#include <limits>
#include <stdexcept>
#include <vector>

#include <kindling/schemes/fan_scaled.hpp>

using namespace kindling;

namespace {

struct block {
  std::uint64_t first, rows;
};

// Rows [first, first + rows) of `total` for `rank` of `ranks`: the first total % ranks
// ranks get one row more.
block rows_of(std::uint64_t total, int rank, int ranks) {
  const auto r = static_cast<std::uint64_t>(rank), n = static_cast<std::uint64_t>(ranks);
  const std::uint64_t base = total / n, extra = total % n;
  return {r * base + (r < extra ? r : extra), base + (r < extra ? 1 : 0)};
}

int byte_count(std::uint64_t elements, std::size_t size) {
  const std::uint64_t bytes = elements * size;
  if (bytes > static_cast<std::uint64_t>(std::numeric_limits<int>::max())) {
    throw std::length_error("kindling mpi example: a shard of " + std::to_string(bytes) +
                            " bytes exceeds MPI's int count");
  }
  return static_cast<int>(bytes);
}

// Fills this rank's rows, gathers on rank 0, compares there. Returns true on rank 0
// when the bytes match (and on every other rank).
template <class E, class Scheme>
bool check_parameter(const char* name, std::uint64_t rows, std::uint64_t cols, const Scheme& scheme, int rank,
                     int ranks, bool flip) {
  const stream s = make_stream(2026, name);
  const dense layer(cols, rows);  // weight [rows, cols]: fan-in cols, fan-out rows
  const block mine = rows_of(rows, rank, ranks);
  std::vector<E> shard(mine.rows * cols);
  if (mine.rows > 0) {  // more ranks than rows: some ranks hold nothing
    const strided_view<E> part(shard.data(), shape(rows, cols), region(shape(mine.first, 0), shape(mine.rows, cols)));
    initialize(part, layer, scheme, s);
    if (flip && rank == ranks - 1) reinterpret_cast<unsigned char*>(shard.data())[0] ^= 0x01u;
  }

  std::vector<int> counts(static_cast<std::size_t>(ranks)), displs(static_cast<std::size_t>(ranks));
  for (int r = 0; r < ranks; ++r) {
    const block b = rows_of(rows, r, ranks);
    counts[static_cast<std::size_t>(r)] = byte_count(b.rows * cols, sizeof(E));
    displs[static_cast<std::size_t>(r)] = byte_count(b.first * cols, sizeof(E));
  }
  std::vector<E> gathered(rank == 0 ? rows * cols : 0);
  MPI_Gatherv(shard.data(), byte_count(shard.size(), sizeof(E)), MPI_BYTE, gathered.data(), counts.data(),
              displs.data(), MPI_BYTE, 0, MPI_COMM_WORLD);
  if (rank != 0) return true;

  std::vector<E> whole(rows * cols);
  initialize(strided_view<E>(whole.data(), shape(rows, cols)), layer, scheme, s);  // one process, all rows
  const bool same = std::memcmp(whole.data(), gathered.data(), whole.size() * sizeof(E)) == 0;
  std::printf("%-32s [%llu, %llu] %s over %d ranks (rows per rank:", name, static_cast<unsigned long long>(rows),
              static_cast<unsigned long long>(cols), scheme.name().c_str(), ranks);
  for (int r = 0; r < ranks; ++r) std::printf(" %llu", static_cast<unsigned long long>(rows_of(rows, r, ranks).rows));
  std::printf("): %s\n", same ? "identical to the single-process fill" : "DIFFERS from the single-process fill");
  return same;
}

}  // namespace

int main(int argc, char** argv) {
  MPI_Init(&argc, &argv);
  int rank = 0, ranks = 1;
  MPI_Comm_rank(MPI_COMM_WORLD, &rank);
  MPI_Comm_size(MPI_COMM_WORLD, &ranks);
  const bool flip = argc > 1 && std::strcmp(argv[1], "--flip-one-byte") == 0;
  int ok = 1;
  try {
    ok &= check_parameter<float>("pump_encoder.layer1.weight", 1003, 517, he_normal{}, rank, ranks, flip) ? 1 : 0;
    ok &= check_parameter<double>("pump_encoder.layer2.weight", 777, 300, glorot_uniform{}, rank, ranks, flip) ? 1 : 0;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "rank %d: %s\n", rank, e.what());
    MPI_Abort(MPI_COMM_WORLD, 2);
  }
  MPI_Bcast(&ok, 1, MPI_INT, 0, MPI_COMM_WORLD);  // every rank exits with rank 0's verdict
  MPI_Finalize();
  return ok ? 0 : 1;
}
