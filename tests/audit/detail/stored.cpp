// Tests of audit/detail/stored.hpp: the distribution of values as stored in an element
// type. The expected masses are worked out by hand from the rounding rule (IEEE 754
// round to nearest; binary16 has 10 fraction bits, so its values in [1, 2) are
// 1 + k 2^-10; bfloat16 has 7) and from the bounds rule of DEVELOPERS.md (a value
// rounded onto an open bound moves one step inside).
#include "kindling/audit/detail/stored.hpp"

#include <doctest/doctest.h>

#include <cmath>

using namespace kindling;

namespace {

// U[1, 2) stored with `bits` fraction bits: atoms 1 + k h, h = 2^-bits. Atom 0 takes
// [1, 1 + h/2), atom k takes [1 + (k - 1/2) h, 1 + (k + 1/2) h), and the last atom,
// 2 - h, also takes [2 - h/2, 2), which rounds to the open bound 2 and moves down.
template <class E>
void uniform_one_two(int bits) {
  const double h = std::ldexp(1.0, -bits);
  const long atoms = 1L << bits;
  const auto mass = [&](long k) { return k == 0 ? h / 2 : (k == atoms - 1 ? 1.5 * h : h); };
  const detail::stored_distribution<E> s(detail::declare(dist::uniform{1.0, 2.0}));
  double below = 0, m1 = 0, m2 = 0;
  for (long k = 0; k < atoms; ++k) {
    const double t = 1 + static_cast<double>(k) * h;
    CHECK(s.below(t + h / 4) == doctest::Approx(below + mass(k)).epsilon(1e-12));  // just above atom k
    below += mass(k);
    m1 += mass(k) * t;
    m2 += mass(k) * t * t;
  }
  CHECK(s.below(1.0) == 0.0);
  CHECK(s.below(2.5) == 1.0);
  const detail::declared_moments m = s.moments();
  CHECK(m.mean == doctest::Approx(m1).epsilon(1e-12));
  CHECK(m.variance == doctest::Approx(m2 - m1 * m1).epsilon(1e-9));
  // The continuous U[1, 2) has variance 1/12; stored, the last atom's extra mass moves it.
  CHECK(std::fabs(m.variance - 1.0 / 12) > h * h / 1000);
}

}  // namespace

TEST_CASE("a uniform stored as float16 or bfloat16 has the atom masses the rounding rule gives") {
  uniform_one_two<float16>(10);
  uniform_one_two<bfloat16>(7);
}

TEST_CASE("a normal stored as bfloat16: its CDF steps at the atoms and its moments are those of the atoms") {
  const detail::declared d = detail::declare(dist::normal{0, 1});
  const detail::stored_distribution<bfloat16> s(d);
  // Between two neighbouring atoms the stored CDF is flat: 1.0 and 1.0078125 (1 + 2^-7).
  CHECK(s.below(1.001) == s.below(1.007));
  // ... and equals the normal CDF at their midpoint, 1.00390625.
  CHECK(s.below(1.005) == doctest::Approx(0.8422880981257646).epsilon(1e-9));  // scipy.stats.norm.cdf(1.00390625)
  // The stored variance, computed independently with numpy and scipy on this machine:
  // every bfloat16 value v with |v| <= 9.5 (numpy's view of the bit patterns as float32),
  // masses scipy.stats.norm.cdf at the midpoints, sum of mass * v^2 - 1 = -2.8342415849813563e-06.
  // (On a logarithmic grid the stored variance is not Sheppard's sigma^2 + w^2/12.)
  const detail::declared_moments m = s.moments();
  CHECK(m.mean == doctest::Approx(0).epsilon(1e-12));
  CHECK(m.variance - 1 == doctest::Approx(-2.8342415849813563e-06).epsilon(1e-4));
}

TEST_CASE("float and double are stored as the continuous distribution to test precision") {
  const detail::declared d = detail::declare(dist::normal{0, 1});
  CHECK(detail::stored_distribution<double>(d).below(0.3) == detail::normal_cdf(0.3));
  CHECK(detail::stored_distribution<float>(d).below(0.3) == doctest::Approx(detail::normal_cdf(0.3)).epsilon(1e-7));
  CHECK(detail::stored_distribution<float>(d).moments().variance == 1.0);
}

TEST_CASE("a narrow bfloat16 normal: the moments, with the atoms nearest zero summed as one, match every atom's") {
  // Computed independently with numpy and scipy on this machine: every finite bfloat16
  // value v with |v - mean| <= 9.5 sigma (31877 atoms, numpy's view of the bit patterns
  // as float32), masses from scipy.special.ndtr at the midpoints, no atom lumped.
  // stored.hpp sums the atoms within 2^-20 sigma of zero as one atom at zero, which may
  // move the mean by at most 2^-39 sigma and the variance by a relative 2^-38.
  const double sigma = 0.02;
  const auto moments = [&](double mean) {
    return detail::stored_distribution<bfloat16>(detail::declare(dist::normal{mean, sigma})).moments();
  };
  const detail::declared_moments centred = moments(0);  // numpy: mean 1.7e-18, variance / sigma^2 - 1 = -2.6400337150844777e-06
  CHECK(std::fabs(centred.mean) < std::ldexp(sigma, -39));
  CHECK(centred.variance / (sigma * sigma) - 1 == doctest::Approx(-2.6400337150844777e-06).epsilon(1e-4));
  // Off centre (mean 0.15 sigma), where the lumped atoms are not at the mean.
  const detail::declared_moments off = moments(0.003);  // numpy: mean - 0.003 = -8.086910122453994e-09, -2.5766226837697914e-06
  CHECK(off.mean - 0.003 == doctest::Approx(-8.086910122453994e-09).epsilon(1e-4));
  CHECK(off.variance / (sigma * sigma) - 1 == doctest::Approx(-2.5766226837697914e-06).epsilon(1e-4));
}
