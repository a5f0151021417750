// Tests of random/sample.hpp: the element -> (block, slot) mapping of DEVELOPERS.md,
// shard invariance of generate(), the distributions' laws, bounds and bad input.
//
// Statistical checks use fixed streams, so they are deterministic; the rates below are
// what they would be over random seeds.
//  - Kolmogorov-Smirnov: D sqrt(n) < c(0.01) = 1.6276236, the limiting critical value of
//    Smirnov's distribution (REFERENCES.md; scipy.stats.kstwobign, verified): false
//    alarm 1% per check. With n = 10^6 it fails for a CDF off by more than 0.0017
//    anywhere (a wrong scale of 0.5%, a shifted mean of 0.004 sd, a lost tail).
//  - Moments: |mean - mu| <= 5 sigma / sqrt(n) and |var - sigma^2| <= 5 sqrt((mu4 -
//    sigma^4) / n): false alarm 5.7e-7 per check (normal approximation).
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <functional>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include "kindling/element.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/random/stream.hpp"

namespace {

namespace dist = kindling::dist;
using kindling::make_stream;
using kindling::stream;

constexpr double ks_c_001 = 1.6276236;  // REFERENCES.md: Kolmogorov limiting c(0.01)
constexpr std::size_t big = 1000000;

template <class C, class D>
std::vector<C> draw(const D& d, const stream& s, std::uint64_t first, std::size_t n,
                    std::uint32_t domain = kindling::domain::values) {
  std::vector<C> v(n);
  dist::generate(d, s, domain, first, n, v.data());
  return v;
}

// sqrt(n) * sup |F_n - F|, for a CDF F.
template <class C>
double ks_statistic(std::vector<C> x, const std::function<long double(long double)>& cdf) {
  std::sort(x.begin(), x.end());
  const auto n = static_cast<long double>(x.size());
  long double d = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const long double f = cdf(static_cast<long double>(x[i]));
    d = std::max({d, (static_cast<long double>(i) + 1) / n - f, f - static_cast<long double>(i) / n});
  }
  return static_cast<double>(d * std::sqrt(n));
}

// Standard normal CDF from glibc's erfcl (an outside reference for kindling's own Phi).
long double phi_ref(long double x) { return 0.5L * std::erfc(-x / std::sqrt(2.0L)); }

template <class C>
void check_moments(const std::vector<C>& x, double mu, double var, double mu4) {
  long double s = 0, s2 = 0;
  for (C v : x) s += static_cast<long double>(v);
  const long double mean = s / static_cast<long double>(x.size());
  for (C v : x) s2 += (static_cast<long double>(v) - mean) * (static_cast<long double>(v) - mean);
  const double sample_var = static_cast<double>(s2 / static_cast<long double>(x.size() - 1));
  const double n = static_cast<double>(x.size());
  CHECK_MESSAGE(std::fabs(static_cast<double>(mean) - mu) <= 5 * std::sqrt(var / n),
                "expected the mean " << static_cast<double>(mean) << " within 5 sigma of " << mu);
  CHECK_MESSAGE(std::fabs(sample_var - var) <= 5 * std::sqrt((mu4 - var * var) / n),
                "expected the variance " << sample_var << " within 5 sigma of " << var);
}

std::string message_of(const std::function<void()>& f) {
  try {
    f();
  } catch (const std::exception& e) {
    return e.what();
  }
  return "(no exception)";
}

template <class C>
bool same_bits(const std::vector<C>& a, const std::vector<C>& b) {
  return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(C)) == 0;
}

}  // namespace

TEST_CASE("generate follows the element -> (block, slot) mapping of DEVELOPERS.md") {
  const stream s = make_stream(2024, "pump.vibration.dense1.weight");
  const dist::uniform d{-1.0, 3.0};
  // Element i: W words per element, E = 4 / W, g = i / (16E), r = i % (16E),
  // slot = r / 16, lane = r % 16, block = 16 g + lane.
  for (std::uint64_t i : {std::uint64_t{0}, std::uint64_t{15}, std::uint64_t{16}, std::uint64_t{63},
                          std::uint64_t{64}, std::uint64_t{1000003}, (std::uint64_t{1} << 40) + 77}) {
    CAPTURE(i);
    {  // float: W = 1, E = 4
      const std::uint64_t g = i / 64, r = i % 64;
      const auto w = s.block(7, 16 * g + r % 16);
      const float u = static_cast<float>(w[r / 16] >> 8) * 0x1p-24f;
      const float want = std::fma(4.0f, u, -1.0f);
      CHECK(draw<float>(d, s, i, 1, 7)[0] == want);
    }
    {  // double: W = 2, E = 2
      const std::uint64_t g = i / 32, r = i % 32;
      const auto w = s.block(7, 16 * g + r % 16);
      const unsigned slot = static_cast<unsigned>(r / 16);
      const std::uint64_t bits53 = ((std::uint64_t{w[2 * slot]} << 32) | w[2 * slot + 1]) >> 11;
      const double want = std::fma(4.0, static_cast<double>(bits53) * 0x1p-53, -1.0);
      CHECK(draw<double>(d, s, i, 1, 7)[0] == want);
    }
  }
}

TEST_CASE("normal values are Box-Muller pairs of slots 2k, 2k+1 of one block") {
  const stream s = make_stream(5, "pump.vibration.dense2.weight");
  // double: elements 32g + l (slot 0) and 32g + 16 + l (slot 1) share block 16g + l.
  const auto v = draw<double>(dist::normal{0.0, 1.0}, s, 320, 32);
  for (unsigned lane = 0; lane < 16; ++lane) {
    const auto w = s.block(kindling::domain::values, 160 + lane);
    const double u1 = kindling::unit_uniform<double>(w, 0), u2 = kindling::unit_uniform<double>(w, 1);
    const double r2 = -2.0 * std::log(1.0 - u1);
    CHECK(std::fabs(v[lane] * v[lane] + v[lane + 16] * v[lane + 16] - r2) <= 1e-13 * (1 + r2));
    const double turn = std::atan2(v[lane + 16], v[lane]) / (2 * 3.14159265358979323846);
    CHECK(std::fabs(turn - (u2 > 0.5 ? u2 - 1.0 : u2)) <= 1e-14);
  }
  // float: slots (0, 1) and (2, 3) of block 16g + l are elements 64g + l, +16, +32, +48.
  const auto f = draw<float>(dist::normal{0.0, 1.0}, s, 0, 64);
  for (unsigned lane = 0; lane < 16; ++lane) {
    const auto w = s.block(kindling::domain::values, lane);
    for (unsigned k = 0; k < 2; ++k) {
      const double u1 = kindling::unit_uniform<float>(w, 2 * k);
      const double a = f[lane + 32 * k], b = f[lane + 32 * k + 16];
      CHECK(std::fabs(a * a + b * b + 2.0 * std::log(1.0 - u1)) <= 1e-5 * (1 - 2.0 * std::log(1.0 - u1)));
    }
  }
}

TEST_CASE("a run equals the concatenation of any split into sub-runs (shard invariance)") {
  const stream s = make_stream(99, "pump.vibration.conv1.weight");
  const std::uint64_t first = (std::uint64_t{1} << 40) + 13;  // mid-group, high block bits
  const std::size_t n = 1500;
  // Split points: inside a block, inside a group, on group edges, runs of length 1.
  const std::vector<std::size_t> cuts = {1, 2, 3, 17, 18, 50, 64, 65, 100, 129, 130, 131, 500, 777, 1024, 1499};
  auto check = [&](const auto& d, auto zero) {
    using C = decltype(zero);
    const auto whole = draw<C>(d, s, first, n);
    std::vector<C> pieces(n);
    std::size_t at = 0;
    for (std::size_t cut : cuts) {
      dist::generate(d, s, kindling::domain::values, first + at, cut - at, pieces.data() + at);
      at = cut;
    }
    dist::generate(d, s, kindling::domain::values, first + at, n - at, pieces.data() + at);
    CHECK_MESSAGE(same_bits(whole, pieces), "expected the split run to equal the whole run");
    // Element by element, in reverse order.
    std::vector<C> single(n);
    for (std::size_t k = n; k-- > 0;) dist::generate(d, s, kindling::domain::values, first + k, 1, &single[k]);
    CHECK_MESSAGE(same_bits(whole, single), "expected single elements to equal the whole run");
  };
  for (int c = 0; c < 2; ++c) {
    CAPTURE(c);
    const auto run = [&](const auto& d) {
      if (c == 0) check(d, 0.0f);
      else check(d, 0.0);
    };
    run(dist::uniform{-0.25, 0.75});
    run(dist::symmetric_uniform{0.05});
    run(dist::normal{0.1, 0.02});
    run(dist::truncated_normal{0.0, 0.02, -2.0, 2.0});
  }
  // Different domains and streams give different values.
  CHECK(!same_bits(draw<float>(dist::normal{0, 1}, s, 0, 64, 0), draw<float>(dist::normal{0, 1}, s, 0, 64, 1)));
}

TEST_CASE("uniform and symmetric uniform: law, moments and bounds") {
  SUBCASE("uniform [lo, hi), float and double") {
    const double lo = -0.5, hi = 2.0, w = hi - lo;
    const auto cdf = [&](long double x) { return std::min(1.0L, std::max(0.0L, (x - lo) / w)); };
    const stream s = make_stream(1, "pump.uniform.law");
    const auto f = draw<float>(dist::uniform{lo, hi}, s, 0, big);
    const auto d = draw<double>(dist::uniform{lo, hi}, s, 0, big);
    CHECK_MESSAGE(ks_statistic(f, cdf) < ks_c_001, "expected KS to accept uniform (float)");
    CHECK_MESSAGE(ks_statistic(d, cdf) < ks_c_001, "expected KS to accept uniform (double)");
    check_moments(f, (lo + hi) / 2, w * w / 12, w * w * w * w / 80);
    check_moments(d, (lo + hi) / 2, w * w / 12, w * w * w * w / 80);
    CHECK(*std::min_element(f.begin(), f.end()) >= static_cast<float>(lo));
    CHECK(*std::max_element(f.begin(), f.end()) < static_cast<float>(hi));
    CHECK(*std::min_element(d.begin(), d.end()) >= lo);
    CHECK(*std::max_element(d.begin(), d.end()) < hi);
  }
  SUBCASE("the largest variate stays below hi") {
    // u = 1 - 2^-24 gives fma(hi - lo, u, lo) == hi in float for this range; it is pulled below.
    const stream s = make_stream(3, "pump.uniform.edge");
    const auto v = draw<float>(dist::uniform{1.0, 1.0 + 0x1p-20}, s, 0, 4096);
    for (float x : v) REQUIRE(x < static_cast<float>(1.0 + 0x1p-20));
  }
  SUBCASE("symmetric uniform (-b, b)") {
    const double b = 0.3;
    const stream s = make_stream(2, "pump.symmetric.law");
    const auto cdf = [&](long double x) { return std::min(1.0L, std::max(0.0L, (x + b) / (2 * b))); };
    const auto f = draw<float>(dist::symmetric_uniform{b}, s, 0, big);
    const auto d = draw<double>(dist::symmetric_uniform{b}, s, 0, big);
    CHECK(ks_statistic(f, cdf) < ks_c_001);
    CHECK(ks_statistic(d, cdf) < ks_c_001);
    check_moments(f, 0.0, b * b / 3, b * b * b * b / 5);
    check_moments(d, 0.0, b * b / 3, b * b * b * b / 5);
    for (float x : f) REQUIRE(std::fabs(x) < static_cast<float>(b));
    for (double x : d) REQUIRE(std::fabs(x) < b);
    // The variates are odd multiples of 2^-24: never 0, and the set of possible
    // values is symmetric, so every value is +-b * (k + 1/2) 2^-23 for b = 1.
    const auto one = draw<float>(dist::symmetric_uniform{1.0}, s, 0, 10000);
    for (float x : one) {
      const float k = x * 0x1p23f - 0.5f;
      REQUIRE(k == std::floor(k));
      REQUIRE(x != 0.0f);
    }
  }
}

TEST_CASE("normal: law, moments, tails and pair independence") {
  const double m = 1.5, sd = 2.0;
  const auto cdf = [&](long double x) { return phi_ref((x - m) / sd); };
  const stream s = make_stream(4, "pump.normal.law");
  const auto f = draw<float>(dist::normal{m, sd}, s, 0, big);
  const auto d = draw<double>(dist::normal{m, sd}, s, 0, big);
  CHECK_MESSAGE(ks_statistic(f, cdf) < ks_c_001, "expected KS to accept the normal (float)");
  CHECK_MESSAGE(ks_statistic(d, cdf) < ks_c_001, "expected KS to accept the normal (double)");
  check_moments(f, m, sd * sd, 3 * sd * sd * sd * sd);
  check_moments(d, m, sd * sd, 3 * sd * sd * sd * sd);
  // Two-sided tail beyond 3 sd: P = 0.0026997960632601866 (erfc(3/sqrt2), A&S 26.2);
  // 5 binomial sigma.
  const double p3 = 0.0026997960632601866;
  std::size_t beyond = 0;
  for (double x : d) beyond += std::fabs(x - m) > 3 * sd;
  CHECK(std::fabs(static_cast<double>(beyond) / big - p3) <= 5 * std::sqrt(p3 * (1 - p3) / big));
  // z0 and z1 of one pair are uncorrelated: |corr| <= 5 / sqrt(pairs).
  long double sxy = 0;
  std::size_t pairs = 0;
  for (std::size_t g = 0; g + 32 <= big; g += 32)
    for (std::size_t l = 0; l < 16; ++l, ++pairs)
      sxy += static_cast<long double>((d[g + l] - m) / sd) * ((d[g + l + 16] - m) / sd);
  CHECK(std::fabs(static_cast<double>(sxy) / static_cast<double>(pairs)) <= 5 / std::sqrt(static_cast<double>(pairs)));
}

TEST_CASE("truncated normal: law, variance, tails and bounds") {
  SUBCASE("cut [-2, 2]: the stddev formula matches REFERENCES.md and the samples") {
    // REFERENCES.md: standard normal truncated to [-2, 2] has std 0.8796256610342398,
    // variance 0.7737413035499232 (standard formula; scipy.stats.truncnorm, verified).
    CHECK(std::fabs(kindling::truncated_normal_stddev(-2.0, 2.0) / 0.8796256610342398 - 1.0) <= 1e-15);
    const double m = -0.25, sd = 0.5;
    const dist::truncated_normal t{m, sd, -2.0, 2.0};
    const stream s = make_stream(6, "pump.truncated.law");
    const long double z = phi_ref(2) - phi_ref(-2);
    const auto cdf = [&](long double x) {
      const long double y = std::min(2.0L, std::max(-2.0L, (x - m) / sd));
      return (phi_ref(y) - phi_ref(-2)) / z;
    };
    const auto f = draw<float>(t, s, 0, big);
    const auto d = draw<double>(t, s, 0, big);
    CHECK_MESSAGE(ks_statistic(f, cdf) < ks_c_001, "expected KS to accept the truncated normal (float)");
    CHECK_MESSAGE(ks_statistic(d, cdf) < ks_c_001, "expected KS to accept the truncated normal (double)");
    // Fourth central moment of the truncated standard normal on [-c, c]:
    // 3 - (c^3 + 3c) 2 phi(c) / Z (integration by parts of the normal moments).
    const double c = 2.0, pdf_c = std::exp(-2.0) / std::sqrt(2 * 3.14159265358979323846);
    const double var = 0.7737413035499232 * sd * sd;
    const double mu4 = (3 - (c * c * c + 3 * c) * 2 * pdf_c / static_cast<double>(z)) * sd * sd * sd * sd;
    check_moments(f, m, var, mu4);
    check_moments(d, m, var, mu4);
    const auto b = dist::bounds_of(t);
    for (float x : f) REQUIRE(kindling::element_traits<float>::from_compute(x, b) >= b.lo);
    for (double x : d) REQUIRE((x >= b.lo && x <= b.hi));
  }
  SUBCASE("a cut far in the upper tail keeps its resolution in float") {
    // [5, 6]: Phi(5) = 1 - 2.9e-7 is a handful of floats from 1, so an inversion that
    // works with Phi near 1 collapses to a few values; the upper-tail form does not.
    const dist::truncated_normal t{0.0, 1.0, 5.0, 6.0};
    const stream s = make_stream(7, "pump.truncated.tail");
    const long double qa = phi_ref(-5), qb = phi_ref(-6);
    const auto cdf = [&](long double x) { return (qa - phi_ref(-std::min(6.0L, std::max(5.0L, x)))) / (qa - qb); };
    const auto f = draw<float>(t, s, 0, big / 4);
    const auto d = draw<double>(t, s, 0, big / 4);
    CHECK(ks_statistic(f, cdf) < ks_c_001);
    CHECK(ks_statistic(d, cdf) < ks_c_001);
    for (float x : f) REQUIRE((x >= 5.0f && x <= 6.0f));
  }
  SUBCASE("one-sided cuts: (-inf, -1] and [0, inf)") {
    const stream s = make_stream(8, "pump.truncated.one_sided");
    const auto lower = draw<double>(dist::truncated_normal{0.0, 1.0, -std::numeric_limits<double>::infinity(), -1.0}, s, 0, big / 4);
    const auto upper = draw<float>(dist::truncated_normal{0.0, 1.0, 0.0, std::numeric_limits<double>::infinity()}, s, 0, big / 4);
    CHECK(ks_statistic(lower, [](long double x) { return phi_ref(std::min(x, -1.0L)) / phi_ref(-1); }) < ks_c_001);
    CHECK(ks_statistic(upper, [](long double x) { return std::max(0.0L, 2 * phi_ref(x) - 1); }) < ks_c_001);
    for (double x : lower) REQUIRE((std::isfinite(x) && x <= -1.0));
    for (float x : upper) REQUIRE((std::isfinite(x) && x >= 0.0f));
  }
  SUBCASE("float16 and bfloat16 elements never leave a cut that they cannot represent") {
    // Bounds m + sd cut = +-0.0123 are not representable in either type.
    const dist::truncated_normal t{0.0, 0.01, -1.23, 1.23};
    const auto b = dist::bounds_of(t);
    const auto v = draw<float>(t, make_stream(9, "pump.truncated.f16"), 0, big / 4);
    std::size_t at_edge = 0;
    for (float x : v) {
      const double h = kindling::element_traits<kindling::float16>::to_double(
          kindling::element_traits<kindling::float16>::from_compute(x, b));
      const double g = kindling::element_traits<kindling::bfloat16>::to_double(
          kindling::element_traits<kindling::bfloat16>::from_compute(x, b));
      REQUIRE((h >= b.lo && h <= b.hi && g >= b.lo && g <= b.hi));
      at_edge += std::fabs(x) > 0.0122;
    }
    CHECK_MESSAGE(at_edge > 0, "expected samples near the cut, where rounding could cross it");
  }
}

TEST_CASE("truncated_normal_stddev follows the standard formula") {
  // Var = 1 + (a phi(a) - b phi(b)) / Z - ((phi(a) - phi(b)) / Z)^2, evaluated here in
  // long double with glibc's erfcl and expl, for cuts of several shapes.
  const auto ref = [](long double a, long double b) {
    const auto pdf = [](long double x) { return std::isinf(x) ? 0.0L : std::exp(-x * x / 2) / std::sqrt(2 * 3.14159265358979323846264L); };
    const long double z = b <= 0 ? phi_ref(b) - phi_ref(a) : phi_ref(-a) - phi_ref(-b);
    const long double ta = std::isinf(a) ? 0.0L : a * pdf(a), tb = std::isinf(b) ? 0.0L : b * pdf(b);
    const long double mean = (pdf(a) - pdf(b)) / z;
    return std::sqrt(1 + (ta - tb) / z - mean * mean);
  };
  const double inf = std::numeric_limits<double>::infinity();
  const struct { double a, b, tol; } cases[] = {
      {-2, 2, 1e-15}, {-1, 1, 1e-15}, {-3, 0.5, 1e-15}, {0, inf, 1e-15}, {-inf, inf, 1e-15},
      {-inf, -1, 1e-14}, {2.5, 4, 1e-13}, {-6, -5, 1e-12}};
  for (const auto& c : cases) {
    CAPTURE(c.a);
    CAPTURE(c.b);
    CHECK(std::fabs(kindling::truncated_normal_stddev(c.a, c.b) / static_cast<double>(ref(c.a, c.b)) - 1) <= c.tol);
  }
}

TEST_CASE("bad distribution parameters are rejected naming the field, before any write") {
  const double nan = std::numeric_limits<double>::quiet_NaN(), inf = std::numeric_limits<double>::infinity();
  const stream s = make_stream(10, "pump.bad");
  auto rejects = [&](const auto& d, const std::string& field) {
    CAPTURE(field);
    const std::string msg = message_of([&] { dist::validate(d); });
    // The core's message style: kindling::<function>: argument '<name>' = <value>, expected <what>.
    CHECK_MESSAGE(msg.rfind("kindling::dist::", 0) == 0, "expected the message to name the call: " << msg);
    CHECK_MESSAGE(msg.find("argument '" + field + "' = ") != std::string::npos, "expected the message to name " << field << ": " << msg);
    CHECK_MESSAGE(msg.find(", expected ") != std::string::npos, "expected the message to say what was expected: " << msg);
    CHECK_THROWS_AS(dist::validate(d), std::domain_error);
    std::vector<float> f(40, 7.0f);
    std::vector<double> g(40, 7.0);
    CHECK_THROWS_AS(dist::generate(d, s, 0, 0, f.size(), f.data()), std::domain_error);
    CHECK_THROWS_AS(dist::generate(d, s, 0, 0, g.size(), g.data()), std::domain_error);
    CHECK_MESSAGE(std::all_of(f.begin(), f.end(), [](float x) { return x == 7.0f; }), "expected nothing written");
    CHECK_MESSAGE(std::all_of(g.begin(), g.end(), [](double x) { return x == 7.0; }), "expected nothing written");
  };
  SUBCASE("uniform") {
    rejects(dist::uniform{nan, 1}, "lo");
    rejects(dist::uniform{-inf, 1}, "lo");
    rejects(dist::uniform{0, inf}, "hi");
    rejects(dist::uniform{1, 1}, "hi");
    rejects(dist::uniform{2, 1}, "hi");
    rejects(dist::uniform{1, 1 + 1e-12}, "hi");  // equal after rounding to float
    rejects(dist::uniform{-3e38, 3e38}, "hi");   // hi - lo overflows float
    rejects(dist::uniform{0, 1e300}, "hi");      // not finite in float
  }
  SUBCASE("symmetric uniform") {
    rejects(dist::symmetric_uniform{0}, "bound");
    rejects(dist::symmetric_uniform{-1}, "bound");
    rejects(dist::symmetric_uniform{nan}, "bound");
    rejects(dist::symmetric_uniform{inf}, "bound");
    rejects(dist::symmetric_uniform{1e-50}, "bound");  // 0 in float
  }
  SUBCASE("normal") {
    rejects(dist::normal{nan, 1}, "mean");
    rejects(dist::normal{inf, 1}, "mean");
    rejects(dist::normal{0, 0}, "stddev");
    rejects(dist::normal{0, -1}, "stddev");
    rejects(dist::normal{0, nan}, "stddev");
    rejects(dist::normal{0, inf}, "stddev");
  }
  SUBCASE("truncated normal") {
    rejects(dist::truncated_normal{nan, 1, -2, 2}, "mean");
    rejects(dist::truncated_normal{0, 0, -2, 2}, "stddev");
    rejects(dist::truncated_normal{0, 1, nan, 2}, "cut_lo");
    rejects(dist::truncated_normal{0, 1, -2, nan}, "cut_hi");
    rejects(dist::truncated_normal{0, 1, inf, inf}, "cut_lo");
    rejects(dist::truncated_normal{0, 1, -inf, -inf}, "cut_hi");
    rejects(dist::truncated_normal{0, 1, 2, 2}, "cut_hi");
    rejects(dist::truncated_normal{0, 1, 2, -2}, "cut_hi");
    rejects(dist::truncated_normal{0, 1, 15, 16}, "cut_lo");  // probability 3e-51 < 2^-100
    CHECK_THROWS_AS(kindling::truncated_normal_stddev(1, 1), std::domain_error);
    CHECK(message_of([] { kindling::truncated_normal_stddev(3, 1); }).find("argument 'cut_hi' = 1, expected") != std::string::npos);
  }
  SUBCASE("the run itself") {
    std::vector<double> g(4, 7.0);
    CHECK_THROWS_AS(dist::generate(dist::normal{0, 1}, s, 0, 0, 4, static_cast<double*>(nullptr)), std::invalid_argument);
    CHECK(message_of([&] { dist::generate(dist::normal{0, 1}, s, 0, 0, 4, static_cast<float*>(nullptr)); }).find("kindling::dist::generate: argument 'out' = nullptr, expected") !=
          std::string::npos);
    CHECK_THROWS_AS(dist::generate(dist::normal{0, 1}, s, 0, std::numeric_limits<std::uint64_t>::max() - 2, 4, g.data()),
                    std::length_error);
    CHECK(std::all_of(g.begin(), g.end(), [](double x) { return x == 7.0; }));
  }
}

TEST_CASE("generate with n == 0 writes nothing") {
  const stream s = make_stream(11, "pump.empty");
  std::vector<float> f(8, 7.0f);
  dist::generate(dist::normal{0, 1}, s, 0, 5, 0, f.data() + 4);
  dist::generate(dist::truncated_normal{0, 1, -2, 2}, s, 0, 5, 0, f.data());
  dist::generate(dist::uniform{0, 1}, s, 0, 5, 0, static_cast<float*>(nullptr));
  CHECK(std::all_of(f.begin(), f.end(), [](float x) { return x == 7.0f; }));
}
