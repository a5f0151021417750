// bench/tensor_buffer.hpp: the tensor the throughput benchmarks write (4096 x 4096
// values: 64 MiB of float) and the bytes-per-iteration counter they report, shared so
// that every ratio in bench/RESULTS.md compares runs over the same memory.
#ifndef KINDLING_BENCH_TENSOR_BUFFER_HPP
#define KINDLING_BENCH_TENSOR_BUFFER_HPP

#include <benchmark/benchmark.h>

#include <cstddef>
#include <cstdint>
#include <vector>

namespace kindling_bench {

constexpr std::uint64_t side = 4096, values = side * side;  // 16 Mi values

// One buffer of `values` elements of type E for the whole program, touched once by the
// value-initialization so that no benchmark pays the first-touch page faults.
template <class E>
std::vector<E>& tensor_buffer() {
  static std::vector<E> b(values, E{});
  return b;
}

// Reports `bytes` written per iteration (Google Benchmark shows it as bytes_per_second).
inline void set_bytes(benchmark::State& state, std::size_t bytes) {
  state.SetBytesProcessed(static_cast<int64_t>(state.iterations()) * static_cast<int64_t>(bytes));
}

}  // namespace kindling_bench

#endif  // KINDLING_BENCH_TENSOR_BUFFER_HPP
