// The whole audit of one weight (check_scheme + check_symmetry, one thread) against one
// read of the same tensor, for a 4096 x 4096 He-normal tensor in float and in bfloat16,
// and the conformance pass alone. bench/ratios prints audit_4096_f32_vs_read and
// audit_4096_bf16_vs_read (target >= 0.1: the audit costs at most ten reads), and the
// counter peak_extra_MiB gives the audit's peak extra memory (target: at most the
// tensor's own size, 64 MiB in float, 32 MiB in bfloat16).
#include <benchmark/benchmark.h>

#include <algorithm>
#include <cstdint>
#include <string>
#include <vector>

#include "kindling/audit/conformance.hpp"
#include "kindling/audit/symmetry.hpp"
#include "kindling/kindling.hpp"
#include "peak_memory.hpp"

namespace {

constexpr std::uint64_t side = 4096;

template <class E>
const std::vector<E>& he_tensor() {
  static const std::vector<E> w = [] {
    std::vector<E> v(side * side);
    kindling::initialize(kindling::strided_view<E>(v.data(), kindling::shape(side, side)), kindling::dense(side, side),
                         kindling::he_normal{}, kindling::make_stream(2, "pump.encoder.weight"));
    return v;
  }();
  return w;
}

template <class E>
kindling::strided_view<const E> he_view() {
  return kindling::strided_view<const E>(he_tensor<E>().data(), kindling::shape(side, side));
}

template <class E>
bool audit_once(bool with_symmetry) {
  const auto v = he_view<E>();
  const kindling::audit_report r = kindling::check_scheme(v, kindling::dense(side, side), kindling::he_normal{});
  benchmark::DoNotOptimize(r);
  if (!with_symmetry) return r.passed();
  const kindling::audit_report s = kindling::check_symmetry(v);
  benchmark::DoNotOptimize(s);
  return r.passed() && s.passed();
}

template <class E>
void audit_4096(benchmark::State& state, bool with_symmetry) {
  he_tensor<E>();
  state.counters["peak_extra_MiB"] = kindling_bench::peak_extra_mib([&] { audit_once<E>(with_symmetry); });
  for (auto _ : state) {
    if (!audit_once<E>(with_symmetry)) state.SkipWithError("a correct tensor failed its audit");
  }
  state.SetBytesProcessed(static_cast<int64_t>(state.iterations()) * static_cast<int64_t>(side * side * sizeof(E)));
}

// The same whole audit of one bf16 He-normal tensor of side state.range(0): registered at
// 3136, the weight shape of bench/model_write's model, whose ratio
// model_audit_vs_tensor_audit compares the tool's audit of a whole checkpoint with this
// (the same audit of one such tensor already in memory).
void audit_square_bf16(benchmark::State& state) {
  const auto n = static_cast<std::uint64_t>(state.range(0));
  std::vector<kindling::bfloat16> w(n * n);
  const kindling::strided_view<kindling::bfloat16> out(w.data(), kindling::shape(n, n));
  kindling::initialize(out, kindling::dense(n, n), kindling::he_normal{}, kindling::make_stream(1, "blocks.0.mlp.weight"));
  const kindling::strided_view<const kindling::bfloat16> v(w.data(), kindling::shape(n, n));
  for (auto _ : state) {
    const kindling::audit_report r = kindling::check_scheme(v, kindling::dense(n, n), kindling::he_normal{});
    const kindling::audit_report s = kindling::check_symmetry(v);
    benchmark::DoNotOptimize(r);
    benchmark::DoNotOptimize(s);
    if (!r.passed() || !s.passed()) state.SkipWithError("a correct tensor failed its audit");
  }
  state.SetBytesProcessed(static_cast<int64_t>(state.iterations()) * static_cast<int64_t>(w.size() * sizeof(w[0])));
}

// The same audit as audit_square_bf16, of tensors in memory rather than in cache: several
// tensors of side state.range(0), 96 MiB in all (three times this host's 32 MiB L3), drawn
// under different names and audited in turn, so that each audit reads its tensor from
// memory as the tool's audit of a checkpoint does. A tensor audited over and over stays in
// the L3 when it fits (3136 x 3136 bf16 is 19.7 MB), which no tensor of a whole model does.
void audit_squares_bf16(benchmark::State& state) {
  const auto n = static_cast<std::uint64_t>(state.range(0));
  const std::uint64_t bytes = n * n * sizeof(kindling::bfloat16);
  const std::uint64_t count = std::max<std::uint64_t>(2, ((std::uint64_t{96} << 20) + bytes - 1) / bytes);
  std::vector<std::vector<kindling::bfloat16>> tensors(static_cast<std::size_t>(count));
  for (std::size_t i = 0; i < tensors.size(); ++i) {
    tensors[i].resize(n * n);
    kindling::initialize(kindling::strided_view<kindling::bfloat16>(tensors[i].data(), kindling::shape(n, n)),
                         kindling::dense(n, n), kindling::he_normal{},
                         kindling::make_stream(1, "blocks." + std::to_string(i) + ".mlp.weight"));
  }
  std::size_t next = 0;
  for (auto _ : state) {
    const kindling::strided_view<const kindling::bfloat16> v(tensors[next].data(), kindling::shape(n, n));
    next = (next + 1) % tensors.size();
    const kindling::audit_report r = kindling::check_scheme(v, kindling::dense(n, n), kindling::he_normal{});
    const kindling::audit_report s = kindling::check_symmetry(v);
    benchmark::DoNotOptimize(r);
    benchmark::DoNotOptimize(s);
    if (!r.passed() || !s.passed()) state.SkipWithError("a correct tensor failed its audit");
  }
  state.counters["tensors"] = static_cast<double>(count);
  state.SetBytesProcessed(static_cast<int64_t>(state.iterations()) * static_cast<int64_t>(bytes));
}

// One read of the tensor's bytes: 16 independent 64-bit lanes, so it runs at memory speed.
template <class E>
void read_4096(benchmark::State& state) {
  const std::vector<E>& w = he_tensor<E>();
  const auto* words = reinterpret_cast<const std::uint64_t*>(w.data());
  const std::size_t n = w.size() * sizeof(E) / sizeof(std::uint64_t);
  for (auto _ : state) {
    std::uint64_t lanes[16] = {};
    for (std::size_t i = 0; i + 16 <= n; i += 16) {
      for (std::size_t l = 0; l < 16; ++l) lanes[l] ^= words[i + l];
    }
    std::uint64_t x = 0;
    for (std::uint64_t l : lanes) x ^= l;
    benchmark::DoNotOptimize(x);
  }
}

void audit_4096_f32(benchmark::State& state) { audit_4096<float>(state, true); }
void audit_4096_bf16(benchmark::State& state) { audit_4096<kindling::bfloat16>(state, true); }
void conformance_4096_f32(benchmark::State& state) { audit_4096<float>(state, false); }
void conformance_4096_bf16(benchmark::State& state) { audit_4096<kindling::bfloat16>(state, false); }
void read_4096_f32(benchmark::State& state) { read_4096<float>(state); }
void read_4096_bf16(benchmark::State& state) { read_4096<kindling::bfloat16>(state); }

}  // namespace

BENCHMARK(read_4096_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(read_4096_bf16)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(audit_4096_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(audit_4096_bf16)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(conformance_4096_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(audit_square_bf16)->Arg(3136)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(audit_squares_bf16)->Arg(3136)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(conformance_4096_bf16)->Unit(benchmark::kMillisecond)->UseRealTime();
