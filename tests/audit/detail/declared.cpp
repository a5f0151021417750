// Tests of audit/detail/declared.hpp: the audits' Phi built for CPUs with FMA gives the
// bits of detail::normal_cdf (the value path's, itself checked against scipy in
// tests/detail/scipy_reference.py), over every branch of Cody's erfc and the cut-offs.
#include "kindling/audit/detail/declared.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <vector>

using namespace kindling;

namespace {

std::uint64_t bits(double x) {
  std::uint64_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}

// Points in each branch of normal_cdf (|x|/sqrt 2 <= 0.46875, <= 4, > 4; |x| > 38.5),
// their edges and neighbours, the specials, and a fixed stream of values in [-40, 40].
std::vector<double> points() {
  std::vector<double> xs = {0.0, -0.0, std::numeric_limits<double>::infinity(), -std::numeric_limits<double>::infinity(),
                            std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::denorm_min(),
                            -std::numeric_limits<double>::min()};
  const double sqrt2 = std::sqrt(2.0);
  for (double edge : {0.46875 * sqrt2, 4 * sqrt2, 38.5}) {
    for (double e : {edge, -edge}) {
      double x = e;
      for (int k = 0; k < 4; ++k) x = std::nextafter(x, 0.0);
      for (int k = 0; k < 9; ++k, x = std::nextafter(x, 2 * e)) xs.push_back(x);
    }
  }
  for (int i = -400000; i <= 400000; ++i) xs.push_back(i * 1e-4);  // every branch, both signs, step 1e-4
  std::uint64_t state = 0x243F6A8885A308D3u;                      // SplitMix64 (Steele, Lea & Flood 2014)
  for (int i = 0; i < 200000; ++i) {
    std::uint64_t z = (state += 0x9E3779B97F4A7C15u);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9u;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBu;
    z ^= z >> 31;
    xs.push_back(std::ldexp(static_cast<double>(z >> 11), -53) * 80 - 40);
  }
  return xs;
}

}  // namespace

TEST_CASE("the audits' Phi gives normal_cdf's bits, with FMA instructions or without") {
  long differ = 0, checked = 0;
  for (double x : points()) {
    ++checked;
    if (bits(detail::audit_normal_cdf(x)) != bits(detail::normal_cdf(x))) ++differ;
  }
  CHECK(differ == 0);
  CHECK(checked > 1000000);
#if defined(KINDLING_LANES_X86)
  if (!__builtin_cpu_supports("fma")) {
    MESSAGE("this CPU has no FMA: only the portable Phi was compared");
    return;
  }
  differ = 0;
  for (double x : points()) {
    if (bits(detail::normal_cdf_fma(x)) != bits(detail::normal_cdf(x))) ++differ;
  }
  CHECK(differ == 0);
#endif
}
