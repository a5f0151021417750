// Tests of detail/dmath.hpp: kindling's own log, exp, sincos_2pi, normal pdf, Phi, Phi^-1.
//
// References: std:: functions evaluated in long double (glibc; a more precise type than
// the one under test, so its own error is negligible at the stated tolerances), and
// values of scipy.stats.norm (scipy 1.10.1, printed on this machine with
// /usr/bin/python3; the broader scipy comparison is tests/detail/scipy_reference.py).
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <initializer_list>
#include <limits>

#include "kindling/detail/dmath.hpp"

namespace {

namespace kd = kindling::detail;

// Deterministic inputs for sweeps (splitmix64, Steele, Lea & Flood, OOPSLA 2014).
struct splitmix {
  std::uint64_t x;
  std::uint64_t next() {
    std::uint64_t z = (x += 0x9e3779b97f4a7c15u);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9u;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebu;
    return z ^ (z >> 31);
  }
  double unit() { return static_cast<double>(next() >> 11) * 0x1p-53; }           // [0, 1)
  float unit_f() { return static_cast<float>(next() >> 40) * 0x1p-24f; }          // [0, 1)
};

// Distance in ulps of `got` from the exact value `want` (given more precisely), in units
// of the spacing of T at want.
template <class T>
long double ulps(T got, long double want) {
  if (want == 0.0L) return got == 0 ? 0.0L : std::numeric_limits<long double>::infinity();
  int e;
  std::frexp(static_cast<T>(want), &e);
  const long double unit =
      std::ldexp(1.0L, std::max(e - std::numeric_limits<T>::digits, std::numeric_limits<T>::min_exponent - std::numeric_limits<T>::digits));
  return std::fabs(static_cast<long double>(got) - want) / unit;
}

constexpr long double pi_l = 3.141592653589793238462643383279502884L;

}  // namespace

TEST_CASE("log is within 1.5 ulp (double) and 1 ulp (float) of the exact logarithm") {
  splitmix rng{1};
  SUBCASE("double, reference logl") {
    long double worst = 0;
    auto check = [&](double x) {
      const long double e = ulps(kd::log(x), std::log(static_cast<long double>(x)));
      worst = std::max(worst, e);
    };
    for (int k = 0; k < 200000; ++k) check(1.0 - rng.unit());         // the Box-Muller range
    for (int k = 0; k < 50000; ++k) check(std::ldexp(1.0 + rng.unit(), -1074 + static_cast<int>(rng.next() % 2098)));
    for (double x : {1.0, 0.5, 0x1p-53, 0x1p-1074, 0x1.6a09e667f3bcdp-1, 0x1.6a09e667f3bccp-1,
                     0x1.fffffffffffffp-1, 3.0, 1e300})
      check(x);
    CHECK(kd::log(1.0) == 0.0);
    CHECK(kd::log(0.5) == -0x1.62e42fefa39efp-1);  // -ln 2 correctly rounded
    MESSAGE("log<double> worst error, ulps: " << static_cast<double>(worst));
    CHECK_MESSAGE(worst <= 1.5L, "expected log<double> within 1.5 ulp");
  }
  SUBCASE("float, reference logl") {
    long double worst = 0;
    auto check = [&](float x) {
      worst = std::max(worst, ulps(kd::log(x), std::log(static_cast<long double>(x))));
    };
    for (int k = 0; k < 200000; ++k) check(1.0f - rng.unit_f());
    for (int k = 0; k < 50000; ++k)
      check(std::ldexp(1.0f + rng.unit_f(), -149 + static_cast<int>(rng.next() % 276)));
    for (float x : {1.0f, 0.5f, 0x1p-24f, 0x1p-149f, 0x1.6a09e6p-1f, 0x1.6a09e4p-1f, 0x1.fffffep-1f})
      check(x);
    CHECK(kd::log(1.0f) == 0.0f);
    MESSAGE("log<float> worst error, ulps: " << static_cast<double>(worst));
    CHECK_MESSAGE(worst <= 1.0L, "expected log<float> within 1 ulp");
  }
}

TEST_CASE("sincos_2pi is exact at quarter turns and accurate in between") {
  SUBCASE("quarter turns give exactly 0 and +-1") {
    for (double u : {0.0, 0.25, 0.5, 0.75}) {
      const auto d = kd::sincos_2pi(u);
      const auto f = kd::sincos_2pi(static_cast<float>(u));
      const double s = u == 0.25 ? 1.0 : u == 0.75 ? -1.0 : 0.0;
      const double c = u == 0.0 ? 1.0 : u == 0.5 ? -1.0 : 0.0;
      CHECK(d.sin == s);
      CHECK(d.cos == c);
      CHECK(f.sin == static_cast<float>(s));
      CHECK(f.cos == static_cast<float>(c));
    }
  }
  SUBCASE("octant points are sqrt(1/2) within 1 ulp, with the octant's signs") {
    const long double h = std::sqrt(0.5L);
    for (int j = 1; j < 8; j += 2) {
      const double u = j / 8.0;
      const auto d = kd::sincos_2pi(u);
      const long double s = (j == 1 || j == 3) ? h : -h, c = (j == 1 || j == 7) ? h : -h;
      CHECK(ulps(d.sin, s) <= 1.0L);
      CHECK(ulps(d.cos, c) <= 1.0L);
      const auto f = kd::sincos_2pi(static_cast<float>(u));
      CHECK(ulps(f.sin, s) <= 1.0L);
      CHECK(ulps(f.cos, c) <= 1.0L);
    }
  }
  SUBCASE("sweep against sinl/cosl") {
    // Reference: the exact reduction t = 4u - q (exact in double, proven in dmath.hpp)
    // and sinl/cosl of pi t / 2 in long double, where no zero crossing loses accuracy.
    splitmix rng{2};
    long double worst_d = 0, worst_f = 0, worst_abs = 0;
    for (int k = 0; k < 200000; ++k) {
      const double u = rng.unit();
      const double q = std::floor(4.0 * u + 0.5);
      const long double x = pi_l / 2 * static_cast<long double>(4.0 * u - q);
      const int quadrant = static_cast<int>(q) & 3;
      const long double sx = std::sin(x), cx = std::cos(x);
      const long double s = quadrant == 0 ? sx : quadrant == 1 ? cx : quadrant == 2 ? -sx : -cx;
      const long double c = quadrant == 0 ? cx : quadrant == 1 ? -sx : quadrant == 2 ? -cx : sx;
      const auto d = kd::sincos_2pi(u);
      worst_d = std::max({worst_d, ulps(d.sin, s), ulps(d.cos, c)});
      // Independently of the reduction: plain sinl(2 pi u), absolute error.
      worst_abs = std::max({worst_abs, std::fabs(d.sin - std::sin(2 * pi_l * u)),
                            std::fabs(d.cos - std::cos(2 * pi_l * u))});
      const float uf = static_cast<float>(rng.next() >> 40) * 0x1p-24f;
      const float qf = std::floor(4.0f * uf + 0.5f);
      const long double xf = pi_l / 2 * static_cast<long double>(4.0f * uf - qf);
      const int qq = static_cast<int>(qf) & 3;
      const long double sf = qq == 0 ? std::sin(xf) : qq == 1 ? std::cos(xf) : qq == 2 ? -std::sin(xf) : -std::cos(xf);
      const long double cf = qq == 0 ? std::cos(xf) : qq == 1 ? -std::sin(xf) : qq == 2 ? -std::cos(xf) : std::sin(xf);
      const auto f = kd::sincos_2pi(uf);
      worst_f = std::max({worst_f, ulps(f.sin, sf), ulps(f.cos, cf)});
    }
    MESSAGE("sincos_2pi worst ulps: double " << static_cast<double>(worst_d) << ", float "
                                             << static_cast<double>(worst_f) << "; absolute (double) "
                                             << static_cast<double>(worst_abs));
    CHECK_MESSAGE(worst_d <= 2.0L, "expected sincos_2pi<double> within 2 ulp");
    CHECK_MESSAGE(worst_f <= 2.0L, "expected sincos_2pi<float> within 2 ulp");
    CHECK_MESSAGE(worst_abs <= 2.3e-16L, "expected |error| <= 2^-52 against sinl(2 pi u)");
  }
  SUBCASE("a full turn minus u negates the sine and keeps the cosine, bit for bit") {
    splitmix rng{3};
    for (int k = 0; k < 10000; ++k) {
      const double u = static_cast<double>((rng.next() >> 11) | 1u) * 0x1p-53;
      const auto a = kd::sincos_2pi(u), b = kd::sincos_2pi(1.0 - u);
      REQUIRE(b.sin == -a.sin);
      REQUIRE(b.cos == a.cos);
    }
  }
}

TEST_CASE("exp is within 1 ulp of expl over the normal range") {
  splitmix rng{4};
  long double worst = 0;
  for (int k = 0; k < 200000; ++k) {
    const double x = -708.0 + 1417.0 * rng.unit();
    worst = std::max(worst, ulps(kd::exp(x), std::exp(static_cast<long double>(x))));
  }
  for (double x : {0.0, 1.0, -1.0, 709.78, -708.39, 1e-300, -1e-300})
    worst = std::max(worst, ulps(kd::exp(x), std::exp(static_cast<long double>(x))));
  MESSAGE("exp worst ulps: " << static_cast<double>(worst));
  CHECK_MESSAGE(worst <= 1.0L, "expected exp within 1 ulp");
  CHECK(kd::exp(0.0) == 1.0);
  CHECK(kd::exp(-746.0) == 0.0);
  CHECK(kd::exp(710.0) == std::numeric_limits<double>::infinity());
  // Subnormal results are rounded once: exp(-740) = 4.2e-322 within one subnormal step.
  CHECK(std::fabs(kd::exp(-740.0) - static_cast<double>(std::exp(-740.0L))) <= 0x1p-1074);
}

TEST_CASE("normal pdf and Phi keep their relative accuracy into the tails") {
  splitmix rng{5};
  long double worst_pdf = 0, worst_lower = 0, worst_upper = 0;
  const long double inv_sqrt2 = 1.0L / std::sqrt(2.0L);
  for (int k = 0; k < 200000; ++k) {
    const double x = -37.0 + 45.0 * rng.unit();
    const long double xl = x;
    worst_pdf = std::max(worst_pdf, ulps(kd::normal_pdf(x), std::exp(-xl * xl / 2) / std::sqrt(2 * pi_l)));
    const long double phi = 0.5L * std::erfc(-xl * inv_sqrt2);
    if (x < 0) worst_lower = std::max(worst_lower, ulps(kd::normal_cdf(x), phi));
    else worst_upper = std::max(worst_upper, std::fabs(kd::normal_cdf(x) - phi) / 0x1p-53L);
  }
  MESSAGE("pdf worst ulps " << static_cast<double>(worst_pdf) << "; Phi lower tail worst ulps "
                            << static_cast<double>(worst_lower) << "; upper half worst error in 2^-53 "
                            << static_cast<double>(worst_upper));
  CHECK_MESSAGE(worst_pdf <= 3.0L, "expected the normal pdf within 3 ulp");
  CHECK_MESSAGE(worst_lower <= 8.0L, "expected Phi(x < 0) within 8 ulp relative");
  CHECK_MESSAGE(worst_upper <= 2.0L, "expected Phi(x >= 0) within 2^-52 absolute");
  // scipy.stats.norm.cdf (scipy 1.10.1, this machine). scipy's own relative error is
  // about 1e-15 at x = -3 (its value is 9e-16 below the exact 0.00134989803163009453)
  // and grows in the far tail (5e-12 at x = -30), so the tails are checked against
  // erfcl above and only moderate x against scipy here.
  CHECK(std::fabs(kd::normal_cdf(-3.0) / 0.0013498980316300933 - 1.0) <= 2e-15);
  CHECK(std::fabs(kd::normal_cdf(-1.5) / 0.06680720126885807 - 1.0) <= 2e-15);
  CHECK(std::fabs(kd::normal_cdf(1.0) - 0.8413447460685429) <= 2e-16);
  CHECK(std::fabs(kd::normal_cdf(2.0) - 0.9772498680518208) <= 2e-16);
  CHECK(kd::normal_cdf(0.0) == 0.5);
  CHECK(kd::normal_cdf(-std::numeric_limits<double>::infinity()) == 0.0);
  CHECK(kd::normal_cdf(std::numeric_limits<double>::infinity()) == 1.0);
  CHECK(kd::normal_pdf(std::numeric_limits<double>::infinity()) == 0.0);
}

TEST_CASE("Phi^-1 (AS 241) matches published and scipy values") {
  SUBCASE("PPND16, double: relative 1e-15 against scipy.stats.norm.ppf") {
    // Phi^-1(0.975) = 1.959963984540054: Abramowitz & Stegun 26.2 (REFERENCES.md).
    // The others: scipy.stats.norm.ppf, scipy 1.10.1, this machine.
    const struct { double p, z; } table[] = {
        {1e-300, -37.0470962993612},   {1e-100, -21.273453560965322}, {1e-20, -9.262340089798409},
        {1e-10, -6.361340902404056},   {1e-05, -4.264890793922825},   {0.001, -3.090232306167813},
        {0.02425, -1.972961051311885}, {0.05, -1.6448536269514729},   {0.075, -1.4395314709384563},
        {0.1, -1.2815515655446004},    {0.3, -0.5244005127080409},    {0.7, 0.5244005127080407},
        {0.975, 1.959963984540054},    {0.999, 3.090232306167813},    {1 - 1e-10, 6.361340889697422}};
    for (const auto& row : table) {
      CAPTURE(row.p);
      CHECK(std::fabs(kd::normal_quantile(row.p) / row.z - 1.0) <= 1e-15);
    }
    CHECK(kd::normal_quantile(0.5) == 0.0);
  }
  SUBCASE("PPND16 inverts Phi: relative 1e-15 on p in [1e-300, 1/2]") {
    splitmix rng{6};
    double worst = 0;
    for (int k = 0; k < 100000; ++k) {
      const double p = std::pow(10.0, -300.0 * rng.unit()) * 0.5;
      const double z = kd::normal_quantile(p);
      // Compare in p: the quantile's relative error e gives a relative error z phi/Phi e in p.
      const long double back = 0.5L * std::erfc(-static_cast<long double>(z) / std::sqrt(2.0L));
      const long double slope = std::fabs(z) * std::exp(-static_cast<long double>(z) * z / 2) /
                                std::sqrt(2 * pi_l) / p;  // d log p / d log z
      const long double rel_z = std::fabs(back / p - 1.0L) / std::max(slope, 1e-3L);
      worst = std::max(worst, static_cast<double>(rel_z));
    }
    MESSAGE("PPND16 worst relative error in z: " << worst);
    CHECK_MESSAGE(worst <= 1e-15, "expected PPND16 to be accurate to 1e-15 relative");
  }
  SUBCASE("PPND7, float: relative 5e-7 against the double quantile") {
    splitmix rng{7};
    double worst = 0;
    for (int k = 0; k < 100000; ++k) {
      const float p = static_cast<float>((rng.next() >> 40) | 1u) * 0x1p-24f;
      const double z = kd::normal_quantile(static_cast<double>(p));
      if (z == 0) continue;
      worst = std::max(worst, std::fabs(static_cast<double>(kd::normal_quantile(p)) / z - 1.0));
    }
    for (float p : {1e-38f, 1e-30f, 1e-20f, 1e-10f, 0x1p-25f, 0.075f, 0.3f, 0.925f}) {
      const double z = kd::normal_quantile(static_cast<double>(p));
      worst = std::max(worst, std::fabs(static_cast<double>(kd::normal_quantile(p)) / z - 1.0));
    }
    MESSAGE("PPND7 worst relative error: " << worst);
    CHECK_MESSAGE(worst <= 5e-7, "expected PPND7 (float) within 5e-7 relative");
  }
  SUBCASE("the ends and outside") {
    CHECK(kd::normal_quantile(0.0) == -std::numeric_limits<double>::infinity());
    CHECK(kd::normal_quantile(1.0) == std::numeric_limits<double>::infinity());
    CHECK(std::isnan(kd::normal_quantile(1.5)));
    CHECK(std::isnan(kd::normal_quantile(-0.1f)));
  }
}
