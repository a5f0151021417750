// Fill throughput against baselines measured in the same run (bench/ratios turns the
// medians into the ratios of the performance issue). 64 MiB of float unless noted; the
// buffer is touched before timing and kept alive with DoNotOptimize.
#include <benchmark/benchmark.h>

#include <Eigen/Dense>
#include <algorithm>
#include <numeric>
#include <random>
#include <vector>
#include <xtensor/xrandom.hpp>
#include <xtensor/xtensor.hpp>

#include "kindling/audit/symmetry.hpp"
#include "kindling/eigen.hpp"
#include "kindling/kindling.hpp"
#include "kindling/schemes/orthogonal.hpp"
#include "tensor_buffer.hpp"

namespace {

using kindling_bench::set_bytes;
using kindling_bench::tensor_buffer;
constexpr std::uint64_t rows = kindling_bench::side, cols = kindling_bench::side;  // 16 Mi floats = 64 MiB
const kindling::dense layer(cols, rows);

void std_fill(benchmark::State& state) {
  auto& b = tensor_buffer<float>();
  for (auto _ : state) {
    std::fill(b.begin(), b.end(), 0.5f);
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(float));
}

template <class E, class Scheme>
void scheme_fill(benchmark::State& state, Scheme scheme) {
  auto& b = tensor_buffer<E>();
  const kindling::strided_view<E> v(b.data(), kindling::shape(rows, cols));
  const auto s = kindling::make_stream(1, "bench.w");
  const auto threads = static_cast<std::size_t>(state.range(0));
  for (auto _ : state) {
    if (threads == 1) {
      kindling::initialize(v, layer, scheme, s);
    } else {
      kindling::initialize(v, layer, scheme, s, kindling::thread_executor(threads));
    }
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(E));
}

void glorot_uniform_f32(benchmark::State& state) { scheme_fill<float>(state, kindling::glorot_uniform{}); }
void he_normal_f32(benchmark::State& state) { scheme_fill<float>(state, kindling::he_normal{}); }
void glorot_uniform_bf16(benchmark::State& state) { scheme_fill<kindling::bfloat16>(state, kindling::glorot_uniform{}); }
void he_normal_bf16(benchmark::State& state) { scheme_fill<kindling::bfloat16>(state, kindling::he_normal{}); }

// The compute ceiling: the same count of values (16 Mi) as 1024 fills of one 64 KiB
// tensor that stays in the core's cache, so no memory traffic limits it. When this is
// slower than std::fill of 64 MiB, no store strategy can bring the fill to memory speed
// on this machine with the format's Philox4x32-10.
template <class Scheme>
void in_cache_fill(benchmark::State& state, Scheme scheme) {
  constexpr std::uint64_t side = 128, repeats = rows * cols / (side * side);
  std::vector<float> b(side * side, 0.0f);
  const kindling::strided_view<float> v(b.data(), kindling::shape(side, side));
  const kindling::dense small(side, side);
  const auto s = kindling::make_stream(1, "bench.w");
  for (auto _ : state) {
    for (std::uint64_t r = 0; r < repeats; ++r) {
      kindling::initialize(v, small, scheme, s);
      benchmark::DoNotOptimize(b.data());
      benchmark::ClobberMemory();
    }
  }
  set_bytes(state, rows * cols * sizeof(float));
}
void glorot_uniform_f32_in_cache(benchmark::State& state) { in_cache_fill(state, kindling::glorot_uniform{}); }
void he_normal_f32_in_cache(benchmark::State& state) { in_cache_fill(state, kindling::he_normal{}); }

void mt19937_uniform(benchmark::State& state) {
  auto& b = tensor_buffer<float>();
  const float bound = std::sqrt(6.0f / (rows + cols));
  for (auto _ : state) {
    std::mt19937 g(1);
    std::uniform_real_distribution<float> d(-bound, bound);
    for (float& x : b) x = d(g);
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(float));
}

void mt19937_normal(benchmark::State& state) {
  auto& b = tensor_buffer<float>();
  const float sd = std::sqrt(2.0f / cols);
  for (auto _ : state) {
    std::mt19937 g(1);
    std::normal_distribution<float> d(0.0f, sd);
    for (float& x : b) x = d(g);
    benchmark::DoNotOptimize(b.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(float));
}

// Orthogonal n x n against Eigen's Householder QR of an n x n double matrix and its Q
// alone (what a hand-written orthogonal initializer would run), n = 512 and 2048.
void orthogonal_n(benchmark::State& state, Eigen::Index n) {
  Eigen::MatrixXf q(n, n);
  const auto s = kindling::make_stream(1, "bench.q");
  const auto u = static_cast<std::uint64_t>(n);
  for (auto _ : state) {
    kindling::initialize(kindling::view_of(q), kindling::dense(u, u), kindling::orthogonal{}, s);
    benchmark::DoNotOptimize(q.data());
  }
}
void eigen_qr_n(benchmark::State& state, Eigen::Index n) {
  const Eigen::MatrixXd a = Eigen::MatrixXd::Random(n, n);
  for (auto _ : state) {
    Eigen::HouseholderQR<Eigen::MatrixXd> qr(a);
    Eigen::MatrixXd q = qr.householderQ();
    benchmark::DoNotOptimize(q.data());
  }
}
void orthogonal_512(benchmark::State& state) { orthogonal_n(state, 512); }
void eigen_qr_512(benchmark::State& state) { eigen_qr_n(state, 512); }
void orthogonal_2048(benchmark::State& state) { orthogonal_n(state, 2048); }
void eigen_qr_2048(benchmark::State& state) { eigen_qr_n(state, 2048); }

// One read of the tensor (a sum), the floor for any audit that looks at every value.
void read_f32(benchmark::State& state) {
  auto& b = tensor_buffer<float>();
  for (auto _ : state) {
    float sum = std::accumulate(b.begin(), b.end(), 0.0f);
    benchmark::DoNotOptimize(sum);
  }
  set_bytes(state, rows * cols * sizeof(float));
}

// The duplicate-unit audit (audit/symmetry.hpp) of the 4096 x 4096 He-normal tensor.
void duplicate_units_4096(benchmark::State& state) {
  auto& b = tensor_buffer<float>();
  const kindling::strided_view<const float> v(b.data(), kindling::shape(rows, cols));
  kindling::initialize(kindling::strided_view<float>(b.data(), kindling::shape(rows, cols)), layer,
                       kindling::he_normal{}, kindling::make_stream(1, "bench.w"));
  for (auto _ : state) {
    auto groups = kindling::duplicate_units(v);
    benchmark::DoNotOptimize(groups.data());
  }
  set_bytes(state, rows * cols * sizeof(float));
}

// Eigen's own random fill: setRandom() (uniform on [-1, 1], std::rand underneath).
void eigen_set_random(benchmark::State& state) {
  Eigen::MatrixXf m(rows, cols);
  m.setZero();
  for (auto _ : state) {
    m.setRandom();
    benchmark::DoNotOptimize(m.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(float));
}

// xtensor's own random fills (xt::random::rand / randn on its default mt19937 engine).
void xtensor_rand(benchmark::State& state) {
  xt::xtensor<float, 2> t = xt::zeros<float>({rows, cols});
  for (auto _ : state) {
    t = xt::random::rand<float>({rows, cols}, -1.0f, 1.0f);
    benchmark::DoNotOptimize(t.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(float));
}
void xtensor_randn(benchmark::State& state) {
  xt::xtensor<float, 2> t = xt::zeros<float>({rows, cols});
  for (auto _ : state) {
    t = xt::random::randn<float>({rows, cols}, 0.0f, 0.02f);
    benchmark::DoNotOptimize(t.data());
    benchmark::ClobberMemory();
  }
  set_bytes(state, rows * cols * sizeof(float));
}

}  // namespace

BENCHMARK(std_fill)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(glorot_uniform_f32)->Arg(1)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(he_normal_f32)->Arg(1)->Arg(2)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(glorot_uniform_bf16)->Arg(1)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(he_normal_bf16)->Arg(1)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(glorot_uniform_f32_in_cache)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(he_normal_f32_in_cache)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(mt19937_uniform)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(mt19937_normal)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(orthogonal_512)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(eigen_qr_512)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(orthogonal_2048)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(eigen_qr_2048)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(read_f32)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(duplicate_units_4096)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(eigen_set_random)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(xtensor_rand)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK(xtensor_randn)->Unit(benchmark::kMillisecond)->UseRealTime();
BENCHMARK_MAIN();
