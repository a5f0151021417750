// The symmetry audit (audit/symmetry.hpp) against one read of the same tensor, and its
// cost on tall-narrow and wide-short weights. Each benchmark also reports the peak extra
// memory of one call as the counter peak_extra_MiB: the resident-set high-water mark
// (VmHWM in /proc/self/status) after a call, minus the resident set before it, with the
// mark reset through /proc/self/clear_refs (Linux proc(5)).
#include <benchmark/benchmark.h>

#include <cmath>
#include <cstdint>
#include <vector>

#include "kindling/audit/symmetry.hpp"
#include "kindling/kindling.hpp"
#include "peak_memory.hpp"

namespace {

// A He-normal float tensor of rows x cols, drawn once per shape.
std::vector<float> make_symmetry_tensor(std::uint64_t rows, std::uint64_t cols) {
  std::vector<float> w(rows * cols);
  kindling::fill(kindling::strided_view<float>(w.data(), kindling::shape(rows, cols)),
                 kindling::dist::normal{0, 1 / std::sqrt(static_cast<double>(cols))},
                 kindling::make_stream(1, "heat.exchanger"));
  return w;
}

const std::vector<float>& make_tensor_4096() {
  static const std::vector<float> w = make_symmetry_tensor(4096, 4096);
  return w;
}

// Peak extra MiB of one check_symmetry call on v.
double peak_extra_mib(const kindling::strided_view<const float>& v) {
  return kindling_bench::peak_extra_mib([&] {
    auto report = kindling::check_symmetry(v);
    benchmark::DoNotOptimize(report);
  });
}

void symmetry_tensor(benchmark::State& state, const std::vector<float>& w, std::uint64_t rows, std::uint64_t cols) {
  const kindling::strided_view<const float> v(w.data(), kindling::shape(rows, cols));
  state.counters["peak_extra_MiB"] = peak_extra_mib(v);
  for (auto _ : state) {
    auto report = kindling::check_symmetry(v);
    if (!report) state.SkipWithError(report.explain().c_str());
    benchmark::DoNotOptimize(report);
  }
  state.SetBytesProcessed(static_cast<int64_t>(state.iterations()) * static_cast<int64_t>(rows * cols * sizeof(float)));
}

// One read of the 4096 x 4096 tensor: a sum in 16 independent lanes, which the compiler
// vectorizes, so the read runs at memory speed (a single running sum would be bound by
// the add latency and flatter the audit).
void symmetry_read_4096_f32(benchmark::State& state) {
  const std::vector<float>& w = make_tensor_4096();
  for (auto _ : state) {
    float lanes[16] = {};
    for (std::size_t i = 0; i + 16 <= w.size(); i += 16) {
      for (std::size_t l = 0; l < 16; ++l) lanes[l] += w[i + l];
    }
    float sum = 0;
    for (float x : lanes) sum += x;
    benchmark::DoNotOptimize(sum);
  }
  state.SetBytesProcessed(static_cast<int64_t>(state.iterations()) * static_cast<int64_t>(w.size() * sizeof(float)));
}

void symmetry_4096_f32(benchmark::State& state) { symmetry_tensor(state, make_tensor_4096(), 4096, 4096); }

void symmetry_65536x3_f32(benchmark::State& state) {
  static const std::vector<float> w = make_symmetry_tensor(65536, 3);
  symmetry_tensor(state, w, 65536, 3);
}

void symmetry_3x65536_f32(benchmark::State& state) {
  static const std::vector<float> w = make_symmetry_tensor(3, 65536);
  symmetry_tensor(state, w, 3, 65536);
}

void symmetry_30000x1_f32(benchmark::State& state) {
  static const std::vector<float> w = make_symmetry_tensor(30000, 1);
  symmetry_tensor(state, w, 30000, 1);
}

}  // namespace

BENCHMARK(symmetry_read_4096_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(symmetry_4096_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(symmetry_65536x3_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(symmetry_3x65536_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(symmetry_30000x1_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
