// How close a fill comes to what this machine can do (bench/ratios turns the medians
// into the "vs_limit" ratios). A fill of 64 MiB is bound by the lower of two ceilings,
// both measured here with the same thread count as the fill itself:
//   memory  - the same bytes written with the fastest plain store available: std::fill,
//             or non-temporal (streaming) stores where the CPU has them; each thread
//             writes its contiguous share, as the fill's executor splits the work;
//   compute - the same number of values drawn by the same kindling fill into a 64 KiB
//             buffer per thread that stays in the core's cache, so no memory traffic
//             limits it.
// limit = the faster time of the two ceilings (min of their throughputs); a fill at
// the limit has ratio 1. Arguments are thread counts: 1 and every hardware thread.
#include <benchmark/benchmark.h>

#include <algorithm>
#include <cstdint>
#include <cstring>
#include <thread>
#include <vector>

#if defined(__SSE2__)
#include <immintrin.h>
#endif

#include "kindling/kindling.hpp"
#include "tensor_buffer.hpp"

namespace {

using kindling_bench::set_bytes;
using kindling_bench::side;
using kindling_bench::values;
constexpr std::size_t cache_bytes = 64 * 1024;  // the compute ceiling's buffer, per thread

// Runs f(t) for t in [0, threads) on `threads` threads (this one included), spawned
// per call as kindling's thread_executor does, so both pay the same start-up.
template <class F>
void on_threads(std::size_t threads, const F& f) {
  std::vector<std::thread> helpers;
  helpers.reserve(threads - 1);
  for (std::size_t t = 1; t < threads; ++t) helpers.emplace_back([&f, t] { f(t); });
  f(0);
  for (std::thread& h : helpers) h.join();
}

std::size_t thread_arg(const benchmark::State& state) { return static_cast<std::size_t>(state.range(0)); }

// Thread t's share [begin, end) of n items, contiguous as the fill's chunks are.
void share(std::size_t n, std::size_t threads, std::size_t t, std::size_t* begin, std::size_t* end) {
  *begin = n * t / threads;
  *end = n * (t + 1) / threads;
}

// --- the memory ceiling --------------------------------------------------------------

template <class E>
void memory_plain(benchmark::State& state) {
  auto& b = kindling_bench::tensor_buffer<E>();
  const std::size_t threads = thread_arg(state);
  for (auto _ : state) {
    on_threads(threads, [&](std::size_t t) {
      std::size_t begin = 0, end = 0;
      share(b.size(), threads, t, &begin, &end);
      std::fill(b.begin() + static_cast<std::ptrdiff_t>(begin), b.begin() + static_cast<std::ptrdiff_t>(end), E{});
    });
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, b.size() * sizeof(E));
}

// Non-temporal 16-byte stores (they bypass the cache; on many hosts the fastest way to
// write a buffer larger than the cache). Without SSE2 the plain fill stands in.
void stream_bytes(unsigned char* p, std::size_t n) {
#if defined(__SSE2__)
  std::size_t head = (16 - reinterpret_cast<std::uintptr_t>(p) % 16) % 16;
  head = std::min(head, n);
  std::memset(p, 0, head);
  const __m128i zero = _mm_setzero_si128();
  std::size_t k = head;
  for (; k + 16 <= n; k += 16) _mm_stream_si128(reinterpret_cast<__m128i*>(p + k), zero);
  std::memset(p + k, 0, n - k);
  _mm_sfence();
#else
  std::memset(p, 0, n);
#endif
}

template <class E>
void memory_stream(benchmark::State& state) {
  auto& b = kindling_bench::tensor_buffer<E>();
  const std::size_t threads = thread_arg(state);
  auto* bytes = reinterpret_cast<unsigned char*>(b.data());
  const std::size_t n = b.size() * sizeof(E);
  for (auto _ : state) {
    on_threads(threads, [&](std::size_t t) {
      std::size_t begin = 0, end = 0;
      share(n, threads, t, &begin, &end);
      stream_bytes(bytes + begin, end - begin);
    });
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, n);
}

// --- the fill itself and the compute ceiling -----------------------------------------

template <class E, class Scheme>
void fill(benchmark::State& state) {
  auto& b = kindling_bench::tensor_buffer<E>();
  const kindling::strided_view<E> v(b.data(), kindling::shape(side, side));
  const kindling::dense layer(side, side);
  const auto s = kindling::make_stream(1, "bench.w");
  const std::size_t threads = thread_arg(state);
  for (auto _ : state) {
    if (threads == 1) {
      kindling::initialize(v, layer, Scheme{}, s);
    } else {
      kindling::initialize(v, layer, Scheme{}, s, kindling::thread_executor(threads));
    }
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, b.size() * sizeof(E));
}

// Each thread fills its own 64 KiB tensor (rows x 128) until the threads together have
// drawn as many values as the fill above, through the same scheme and code path.
template <class E, class Scheme>
void compute(benchmark::State& state) {
  constexpr std::uint64_t cols = 128, rows_small = cache_bytes / sizeof(E) / cols;
  const std::size_t threads = thread_arg(state);
  const std::uint64_t repeats = values / (rows_small * cols);
  const kindling::dense layer(cols, rows_small);
  const auto s = kindling::make_stream(1, "bench.w");
  std::vector<std::vector<E>> own(threads, std::vector<E>(rows_small * cols, E{}));
  for (auto _ : state) {
    on_threads(threads, [&](std::size_t t) {
      std::size_t begin = 0, end = 0;
      share(static_cast<std::size_t>(repeats), threads, t, &begin, &end);
      const kindling::strided_view<E> v(own[t].data(), kindling::shape(rows_small, cols));
      for (std::size_t r = begin; r < end; ++r) {
        kindling::initialize(v, layer, Scheme{}, s);
        benchmark::DoNotOptimize(own[t].data());
        benchmark::ClobberMemory();
      }
    });
  }
  set_bytes(state, values * sizeof(E));
}

void limit_fill_uniform_f32(benchmark::State& s) { fill<float, kindling::glorot_uniform>(s); }
void limit_fill_normal_f32(benchmark::State& s) { fill<float, kindling::he_normal>(s); }
void limit_fill_normal_bf16(benchmark::State& s) { fill<kindling::bfloat16, kindling::he_normal>(s); }
void limit_compute_uniform_f32(benchmark::State& s) { compute<float, kindling::glorot_uniform>(s); }
void limit_compute_normal_f32(benchmark::State& s) { compute<float, kindling::he_normal>(s); }
void limit_compute_normal_bf16(benchmark::State& s) { compute<kindling::bfloat16, kindling::he_normal>(s); }
void limit_memory_plain_f32(benchmark::State& s) { memory_plain<float>(s); }
void limit_memory_stream_f32(benchmark::State& s) { memory_stream<float>(s); }
void limit_memory_plain_bf16(benchmark::State& s) { memory_plain<kindling::bfloat16>(s); }
void limit_memory_stream_bf16(benchmark::State& s) { memory_stream<kindling::bfloat16>(s); }

// 1 thread and every hardware thread (once when the machine has one).
void thread_counts(benchmark::internal::Benchmark* b) {
  const auto all = static_cast<int64_t>(std::max(1u, std::thread::hardware_concurrency()));
  b->Arg(1);
  if (all > 1) b->Arg(all);
  b->Unit(benchmark::kMillisecond)->UseRealTime();
}

}  // namespace

BENCHMARK(limit_fill_uniform_f32)->Apply(thread_counts);
BENCHMARK(limit_fill_normal_f32)->Apply(thread_counts);
BENCHMARK(limit_fill_normal_bf16)->Apply(thread_counts);
BENCHMARK(limit_compute_uniform_f32)->Apply(thread_counts);
BENCHMARK(limit_compute_normal_f32)->Apply(thread_counts);
BENCHMARK(limit_compute_normal_bf16)->Apply(thread_counts);
BENCHMARK(limit_memory_plain_f32)->Apply(thread_counts);
BENCHMARK(limit_memory_stream_f32)->Apply(thread_counts);
BENCHMARK(limit_memory_plain_bf16)->Apply(thread_counts);
BENCHMARK(limit_memory_stream_bf16)->Apply(thread_counts);
