// What the exact count of a bfloat16 tensor's bit patterns costs, against one read of it:
// the floor under audit_4096_bf16 (bench/audit_conformance_bench.cpp). check_scheme's
// statistic for a 16-bit type is exact because every value is counted by its pattern
// (include/kindling/audit/detail/tally.hpp, count_patterns); that is one increment of a
// counter in memory a value, 2^24 of them for 4096 x 4096.
//
// pattern_count_4096_bf16 is the library's own pass. The pattern_count_form benchmarks are
// the other ways of counting the same values that were tried, so that bench/RESULTS.md can
// say which is fastest on the machine at hand (each checks its counts against the
// library's and fails the run if they differ):
//   0  one table, one 16-bit load a value
//   1  one table, four values a 64-bit load
//   2  two tables, values alternating (the library's form: equal neighbours do not wait
//      on each other's increments)
//   3  four tables
//   4  16-bit counters with a carry into a 32-bit table (half the footprint)
//   5  AVX-512: sixteen values a vector, a conflict test, then a gather, an add and a
//      scatter of the counters (a scalar fallback for vectors with repeated keys); only
//      where the CPU has AVX-512F and CD
// bench/ratios prints pattern_count_4096_bf16_vs_read.
#include <benchmark/benchmark.h>

#include <cstdint>
#include <cstring>
#include <vector>

#include "kindling/audit/detail/tally.hpp"
#include "kindling/kindling.hpp"

#if defined(__x86_64__) && defined(__GNUC__)
#include <immintrin.h>
#define KINDLING_BENCH_AVX512_FORM 1
#endif

namespace {

constexpr std::uint64_t side = 4096;

const std::vector<kindling::bfloat16>& tensor() {
  static const std::vector<kindling::bfloat16> w = [] {
    std::vector<kindling::bfloat16> v(side * side);
    kindling::initialize(kindling::strided_view<kindling::bfloat16>(v.data(), kindling::shape(side, side)),
                         kindling::dense(side, side), kindling::he_normal{},
                         kindling::make_stream(2, "pump.encoder.weight"));
    return v;
  }();
  return w;
}

const std::uint16_t* patterns() { return reinterpret_cast<const std::uint16_t*>(tensor().data()); }

void pattern_count_4096_bf16(benchmark::State& state) {
  const kindling::strided_view<const kindling::bfloat16> v(tensor().data(), kindling::shape(side, side));
  for (auto _ : state) {
    const kindling::detail::pattern_tally t = kindling::detail::count_patterns(v, 0.0, kindling::serial_executor{});
    benchmark::DoNotOptimize(t.counts.data());
  }
}

#if defined(KINDLING_BENCH_AVX512_FORM)
// GCC 12's own intrinsics header trips its warnings here (an "undefined" vector it leaves
// uninitialized on purpose), and the warnings are errors in this build.
#if !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wuninitialized"
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#pragma GCC diagnostic ignored "-Waggressive-loop-optimizations"
#endif
__attribute__((target("avx512f,avx512cd"))) void count_avx512(const std::uint16_t* p, std::size_t n,
                                                              std::uint32_t* t) {
  std::size_t i = 0;
  for (; i + 16 <= n; i += 16) {
    const __m512i k = _mm512_cvtepu16_epi32(_mm256_loadu_si256(reinterpret_cast<const __m256i*>(p + i)));
    const __m512i conflicts = _mm512_conflict_epi32(k);
    if (_mm512_test_epi32_mask(conflicts, conflicts) == 0) {
      const __m512i c = _mm512_add_epi32(_mm512_i32gather_epi32(k, t, 4), _mm512_set1_epi32(1));
      _mm512_i32scatter_epi32(t, k, c, 4);
    } else {
      for (std::size_t l = 0; l < 16; ++l) ++t[p[i + l]];
    }
  }
  for (; i < n; ++i) ++t[p[i]];
}
#if !defined(__clang__)
#pragma GCC diagnostic pop
#endif
#endif

// Counts of every pattern by form `form` into t (65536 x 4 counters, zeroed here);
// false when the form does not run on this CPU.
bool count_form(int form, std::vector<std::uint32_t>& t) {
  const std::uint16_t* p = patterns();
  const std::size_t n = side * side;
  std::fill(t.begin(), t.end(), 0u);
  std::uint32_t* a = t.data();
  const auto word = [&](std::size_t i) {
    std::uint64_t w;
    std::memcpy(&w, p + i, sizeof w);
    return w;
  };
  switch (form) {
    case 0:
      for (std::size_t i = 0; i < n; ++i) ++a[p[i]];
      return true;
    case 1:
      for (std::size_t i = 0; i < n; i += 4) {
        const std::uint64_t w = word(i);
        ++a[w & 0xFFFF], ++a[(w >> 16) & 0xFFFF], ++a[(w >> 32) & 0xFFFF], ++a[w >> 48];
      }
      return true;
    case 2:
      for (std::size_t i = 0; i < n; i += 4) {
        const std::uint64_t w = word(i);
        ++a[w & 0xFFFF], ++a[65536 + ((w >> 16) & 0xFFFF)], ++a[(w >> 32) & 0xFFFF], ++a[65536 + (w >> 48)];
      }
      return true;
    case 3:
      for (std::size_t i = 0; i < n; i += 4) {
        const std::uint64_t w = word(i);
        ++a[w & 0xFFFF], ++a[65536 + ((w >> 16) & 0xFFFF)], ++a[2 * 65536 + ((w >> 32) & 0xFFFF)],
            ++a[3 * 65536 + (w >> 48)];
      }
      return true;
    case 4: {
      std::vector<std::uint16_t> low(65536, 0);
      for (std::size_t i = 0; i < n; i += 4) {
        const std::uint64_t w = word(i);
        for (int s = 0; s < 64; s += 16) {
          const std::size_t k = (w >> s) & 0xFFFF;
          if (++low[k] == 0) a[k] += 65536;
        }
      }
      for (std::size_t k = 0; k < 65536; ++k) a[k] += low[k];
      return true;
    }
    case 5:
#if defined(KINDLING_BENCH_AVX512_FORM)
      if (!__builtin_cpu_supports("avx512f") || !__builtin_cpu_supports("avx512cd")) return false;
      count_avx512(p, n, a);
      return true;
#else
      return false;
#endif
    default:
      return false;
  }
}

void pattern_count_form(benchmark::State& state) {
  const int form = static_cast<int>(state.range(0));
  std::vector<std::uint32_t> t(4 * 65536);
  if (!count_form(form, t)) {
    state.SkipWithError("this form does not run on this CPU");
    return;
  }
  // The form's counts, its tables summed, against the library's.
  const kindling::strided_view<const kindling::bfloat16> v(tensor().data(), kindling::shape(side, side));
  const kindling::detail::pattern_tally want = kindling::detail::count_patterns(v, 0.0, kindling::serial_executor{});
  for (std::size_t k = 0; k < 65536; ++k) {
    const std::uint64_t got = std::uint64_t{t[k]} + t[65536 + k] + t[2 * 65536 + k] + t[3 * 65536 + k];
    if (got != want.counts[k]) {
      state.SkipWithError("the form's counts differ from the library's");
      return;
    }
  }
  for (auto _ : state) {
    count_form(form, t);
    benchmark::DoNotOptimize(t.data());
  }
}

}  // namespace

BENCHMARK(pattern_count_4096_bf16)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(pattern_count_form)->DenseRange(0, 5)->Unit(benchmark::kMillisecond)->UseRealTime();
