// The cross-build digest: fills a fixed battery of tensors and prints one line
// "CASE HEXDIGEST" per tensor, the SipHash-2-4 of the bytes written (little-endian,
// whatever the host). tests/digest/compare.sh builds this program with several
// compilers, flag sets and CPUs (g++ -O0, g++ -O3 -march=native, clang++ -O2
// -march=native -ffp-contract=fast, aarch64 under qemu) and fails if any line differs:
// the reproducibility contract of DEVELOPERS.md, checked end to end.
//
// Standard library and kindling's core headers only, so that every toolchain builds it.
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <string>
#include <vector>

#include "kindling/kindling.hpp"
#include "kindling/element.hpp"
#include "kindling/fill.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/random/siphash.hpp"
#include "kindling/random/stream.hpp"
#include "kindling/view.hpp"

namespace {

using namespace kindling;  // the battery reads as a user's calls would

// The bit pattern of an element as an unsigned integer of the same size.
inline std::uint64_t bits_of(float x) {
  std::uint32_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}
inline std::uint64_t bits_of(double x) {
  std::uint64_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}
inline std::uint64_t bits_of(kindling::float16 x) { return x.bits; }
inline std::uint64_t bits_of(kindling::bfloat16 x) { return x.bits; }

// SipHash-2-4 of the elements' bytes in little-endian order, under a fixed key.
template <class E>
std::uint64_t digest(const std::vector<E>& memory) {
  std::vector<unsigned char> bytes;
  bytes.reserve(memory.size() * sizeof(E));
  for (const E& x : memory) {
    const std::uint64_t b = bits_of(x);
    for (std::size_t k = 0; k < sizeof(E); ++k) bytes.push_back(static_cast<unsigned char>(b >> (8 * k)));
  }
  return kindling::siphash24(0x0706050403020100u, 0x0f0e0d0c0b0a0908u, bytes.data(), bytes.size());
}

void print(const std::string& name, std::uint64_t h) {
  std::printf("%s %016llx\n", name.c_str(), static_cast<unsigned long long>(h));
}

std::string shape_text(const shape& s) {
  std::string text;
  for (std::size_t d = 0; d < s.rank(); ++d) text += (d ? "x" : "") + std::to_string(s[d]);
  return text;
}

// A whole tensor, row-major.
template <class E, class D>
void whole(const char* what, const shape& s, const D& d, const kindling::stream& st) {
  std::vector<E> memory(s.element_count());
  kindling::fill(strided_view<E>(memory.data(), s), d, st);
  print(std::string(what) + "_" + kindling::element_traits<E>::name + "_" + shape_text(s), digest(memory));
}

// Every element-wise distribution in every element type, on a shape of its own.
template <class E>
void each_distribution(const kindling::stream& st, const shape& s) {
  whole<E>("uniform", s, dist::uniform{-0.0625, 0.125}, st);
  whole<E>("symmetric_uniform", s, dist::symmetric_uniform{0.08838834764831845}, st);
  whole<E>("normal", s, dist::normal{0.01, 0.0441941738241592}, st);
  whole<E>("truncated_normal", s, dist::truncated_normal{0.0, 0.05, -2.0, 2.0}, st);
}

}  // namespace

int main() {
  const kindling::stream st = kindling::make_stream(20240611, "pump_vibration.encoder.weight");

  each_distribution<float>(st, {7, 13, 3});
  each_distribution<double>(st, {129, 65});
  each_distribution<kindling::float16>(st, {3, 3, 16, 8});
  each_distribution<kindling::bfloat16>(st, {1001});

  // A truncation far in one tail (inverse-CDF path) and a big tensor of many chunks.
  whole<double>("truncated_normal_tail", {64, 64}, dist::truncated_normal{0.0, 1.0, 2.5, 6.0}, st);
  whole<float>("normal_chunks", {300, 700}, dist::normal{0.0, 1.0}, st);

  // Column-major memory of a 37 x 129 matrix.
  {
    std::vector<float> memory(37 * 129);
    kindling::fill(strided_view<float>(memory.data(), {37, 129}, storage_order::column_major),
                   dist::normal{0.0, 0.1}, st);
    print("normal_f32_37x129_column_major", digest(memory));
  }
  // Rows 5..16, columns 61..130 of a 64 x 200 shape, stored densely on their own.
  {
    std::vector<double> memory(12 * 70);
    kindling::fill(strided_view<double>(memory.data(), {64, 200}, region({5, 61}, {12, 70})),
                   dist::truncated_normal{0.0, 1.0, -1.5, 3.0}, st);
    print("truncated_normal_f64_region_5+12x61+70_of_64x200", digest(memory));
  }
  // Reversed rows and padded rows (the padding stays zero), in float16.
  {
    std::vector<kindling::float16> memory(9 * 24, kindling::float16{0});
    kindling::fill(strided_view<kindling::float16>(memory.data() + 8 * 24, {9, 20}, region::whole({9, 20}),
                                                   strides{-24, 1}),
                   dist::uniform{-1.0, 1.0}, st);
    print("uniform_f16_9x20_reversed_padded", digest(memory));
  }
  // Another domain and a child stream.
  {
    std::vector<float> memory(5000);
    kindling::fill(strided_view<float>(memory.data(), {5000}), dist::uniform{0.0, 1.0}, st.indexed(3),
                   kindling::domain::positions);
    print("uniform_f32_5000_indexed3_positions", digest(memory));
  }
  // Schemes: their parameters (bounds, standard deviations, sparse positions, bias
  // logits) come from fans through sqrt, division and the library's own log.
  {
    const kindling::stream model = kindling::stream::root(20261202);
    std::vector<float> conv(16 * 3 * 7);
    kindling::initialize(strided_view<float>(conv.data(), {16, 3, 7}), kindling::convolution(3, 16, {7}),
                         kindling::he_normal{0.1}, model.named("conv1.weight"));
    print("scheme_he_normal_leaky_f32_16x3x7", digest(conv));
    std::vector<kindling::bfloat16> lstm(96 * 32);
    kindling::initialize(strided_view<kindling::bfloat16>(lstm.data(), {96, 32}), kindling::packed_dense::lstm(32, 24),
                         kindling::glorot_uniform{}, model.named("lstm.w_ih"));
    print("scheme_glorot_uniform_packed_lstm_bf16_96x32", digest(lstm));
    std::vector<double> trunc(50 * 40);
    kindling::initialize(strided_view<double>(trunc.data(), {50, 40}), kindling::dense(40, 50),
                         kindling::fan_scaled{2.0, kindling::fan_basis::average,
                                                    kindling::draw_shape::truncated_normal, 2.0},
                         model.named("dense.w"));
    print("scheme_fan_scaled_truncated_f64_50x40", digest(trunc));
    std::vector<float> sparse(30 * 200);
    kindling::initialize(strided_view<float>(sparse.data(), {30, 200}), kindling::dense(200, 30),
                         kindling::sparse{15, 1.0}, model.named("sparse.w"));
    print("scheme_sparse15_f32_30x200", digest(sparse));
    std::vector<double> bias(8);
    kindling::initialize_bias(strided_view<double>(bias.data(), {8}), kindling::sigmoid_target_bias{0.03});
    print("scheme_sigmoid_target_bias_f64_8", digest(bias));
  }
  return 0;
}
