// Prints kindling's values for tests/detail/scipy_reference.py, which checks them
// against scipy.stats and numpy, run by the ctest entry "detail: scipy reference ..."
// (tests/detail/extra.cmake). Not a doctest file: reference/ is outside the glob of
// tests/CMakeLists.txt, so this program keeps its own main (built by
// kindling_reference_check).
//
// Output lines, whitespace separated, numbers in C99 hex floats (exact):
//   cdf X PHI                      kindling::detail::normal_cdf
//   ppf P Z_DOUBLE Z_FLOAT         kindling::detail::normal_quantile (PPND16, PPND7)
//   tstd A B STD                   kindling::truncated_normal_stddev
//   f16 FLOAT_BITS HALF_BITS BF16_BITS   round_to_float16 / round_to_bfloat16 (hex)
//   sample NAME TYPE M S A B V...  generated values; A B the cuts (uniform: lo hi)
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <limits>
#include <string>
#include <vector>

#include "kindling/element.hpp"
#include "kindling/random/sample.hpp"

namespace {

using namespace kindling;

template <class C, class D>
void print_sample(const char* name, const D& d, double m, double s, double a, double b, std::size_t n) {
  std::vector<C> v(n);
  dist::generate(d, make_stream(20240601, name), domain::values, 0, n, v.data());
  std::printf("sample %s %s %a %a %a %a", name, sizeof(C) == 8 ? "f64" : "f32", m, s, a, b);
  for (C x : v) std::printf(" %a", static_cast<double>(x));
  std::printf("\n");
}

}  // namespace

int main() {
  for (int k = 0; k <= 400; ++k) {
    const double x = -38.0 + 0.115 * k;  // -38 .. 8
    std::printf("cdf %a %a\n", x, detail::normal_cdf(x));
  }
  for (int e = -300; e <= -1; e += 1) {
    const double p = std::pow(10.0, e);
    std::printf("ppf %a %a %a\n", p, detail::normal_quantile(p),
                static_cast<double>(detail::normal_quantile(static_cast<float>(p))));
  }
  for (int k = 1; k < 200; ++k) {
    const double p = k / 200.0;
    std::printf("ppf %a %a %a\n", p, detail::normal_quantile(p),
                static_cast<double>(detail::normal_quantile(static_cast<float>(p))));
  }
  const double inf = std::numeric_limits<double>::infinity();
  const double cuts[][2] = {{-2, 2}, {-1, 1}, {-3, 0.5}, {0, inf}, {-inf, -1}, {0.5, 3}, {2.5, 4}, {-0.1, 0.1}};
  for (const auto& c : cuts) std::printf("tstd %a %a %a\n", c[0], c[1], truncated_normal_stddev(c[0], c[1]));
  for (std::uint64_t b = 0; b < 0x100000000u; b += 40009) {
    float f;
    const auto bits = static_cast<std::uint32_t>(b);
    std::memcpy(&f, &bits, sizeof f);
    if (std::isnan(f)) continue;
    std::printf("f16 %08x %04x %04x\n", static_cast<unsigned>(bits), static_cast<unsigned>(round_to_float16(f).bits),
                static_cast<unsigned>(round_to_bfloat16(f).bits));
  }
  const std::size_t n = 100000;
  print_sample<float>("normal_f32", dist::normal{0.5, 2.0}, 0.5, 2.0, -inf, inf, n);
  print_sample<double>("normal_f64", dist::normal{0.5, 2.0}, 0.5, 2.0, -inf, inf, n);
  print_sample<float>("trunc_f32", dist::truncated_normal{-1.0, 0.5, -2.0, 2.0}, -1.0, 0.5, -2.0, 2.0, n);
  print_sample<double>("trunc_f64", dist::truncated_normal{-1.0, 0.5, -2.0, 2.0}, -1.0, 0.5, -2.0, 2.0, n);
  print_sample<float>("trunc_tail_f32", dist::truncated_normal{0.0, 1.0, 4.0, inf}, 0.0, 1.0, 4.0, inf, n);
  print_sample<double>("trunc_asym_f64", dist::truncated_normal{2.0, 3.0, -0.5, 1.5}, 2.0, 3.0, -0.5, 1.5, n);
  print_sample<float>("uniform_f32", dist::uniform{-0.2, 0.6}, 0, 0, -0.2, 0.6, n);
  print_sample<double>("symmetric_f64", dist::symmetric_uniform{0.05}, 0, 0, -0.05, 0.05, n);
  return 0;
}
