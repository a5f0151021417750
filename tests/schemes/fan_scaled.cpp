// Tests of schemes/fan_scaled.hpp: Glorot, He and LeCun through the public API on
// real tensors, against the published variance formulas (REFERENCES.md).
//
// Statistical checks use fixed seeds, so each run is deterministic. Sizing: the KS
// checks use the 1% critical value (false-alarm rate 1% per check over random seeds);
// the variance checks allow 6 standard errors of the sample variance (false-alarm rate
// below 1e-8 per check). A fan off by a factor of 1.1 moves the variance by 10%, which
// is more than 6 standard errors at the sizes used (relative standard error <= 0.4%).
#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "../support/errors.hpp"
#include "../support/stats.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;
using kindling_test::ks_critical;
using kindling_test::ks_distance;

namespace {

std::vector<double> draw(const fans& f, const fan_scaled& rule, std::uint64_t n, const char* name) {
  std::vector<double> out(static_cast<std::size_t>(n));
  initialize(strided_view<double>(out.data(), shape(n)), weight_info{f, weight_layout::out_in}, rule,
             make_stream(2024, name));
  return out;
}

// Relative standard error of the sample variance: sqrt((kurtosis - 1) / n).
double variance_tolerance(double kurtosis, std::size_t n) {
  return 6 * std::sqrt((kurtosis - 1) / static_cast<double>(n));
}

}  // namespace

TEST_CASE("glorot_uniform draws uniformly inside ±sqrt(6/(fan_in+fan_out)) (Glorot & Bengio 2010, eq. 16)") {
  const dense layer(300, 500);  // weight [500, 300]
  std::vector<float> w(150000);
  initialize(strided_view<float>(w.data(), shape(500, 300)), layer, glorot_uniform{}, make_stream(7, "pump.enc1.w"));
  const double bound = std::sqrt(6.0 / (300 + 500));
  std::vector<double> x(w.begin(), w.end());
  for (double v : x) REQUIRE(std::abs(v) < bound);
  const double d = ks_distance(x, [&](double t) { return (t + bound) / (2 * bound); });
  CHECK_MESSAGE(d < ks_critical(x.size()), "KS distance to U(-b, b) is " << d);
  const double var = kindling_test::variance_of(x);
  CHECK(var == doctest::Approx(2.0 / 800).epsilon(variance_tolerance(1.8, x.size())));  // uniform kurtosis 9/5
  CHECK(std::abs(kindling_test::mean_of(x)) < 6 * std::sqrt(var / static_cast<double>(x.size())));
}

TEST_CASE("glorot_uniform with a gain scales the bound by the gain") {
  const double gain = 5.0 / 3.0;  // the tanh table value, common practice
  const auto d = std::get<dist::symmetric_uniform>(glorot_uniform(gain).distribution(fans{100, 60, 1}));
  CHECK(d.bound == doctest::Approx(gain * std::sqrt(6.0 / 160)).epsilon(1e-15));
}

TEST_CASE("glorot_normal has variance 2/(fan_in+fan_out) (Glorot & Bengio 2010, eq. 12)") {
  const fans f{256, 128, 1};
  const auto x = draw(f, glorot_normal{}.rule(), 200000, "glorot_normal");
  const double sd = std::sqrt(2.0 / 384);
  const double d = ks_distance(x, [&](double t) { return kindling_test::normal_cdf(t / sd); });
  CHECK_MESSAGE(d < ks_critical(x.size()), "KS distance to N(0, 2/384) is " << d);
  CHECK(kindling_test::variance_of(x) == doctest::Approx(sd * sd).epsilon(variance_tolerance(3, x.size())));
}

TEST_CASE("he_normal of a 3x3 convolution uses fan_in = channels x receptive field (He et al. 2015)") {
  const convolution conv(64, 128, {3, 3});  // in 64, out 128: weight [128, 64, 3, 3]
  std::vector<float> w(128 * 64 * 9);
  initialize(strided_view<float>(w.data(), shape(128, 64, 3, 3)), conv, he_normal{}, make_stream(1, "conv1.w"));
  std::vector<double> x(w.begin(), w.end());
  const double sd = std::sqrt(2.0 / (64 * 9));
  const double d = ks_distance(x, [&](double t) { return kindling_test::normal_cdf(t / sd); });
  CHECK_MESSAGE(d < ks_critical(x.size()), "KS distance to N(0, 2/576) is " << d);
  const double var = kindling_test::variance_of(x);
  CHECK_MESSAGE(var == doctest::Approx(sd * sd).epsilon(variance_tolerance(3, x.size())),
                "variance " << var << " expected 2/576; 2/64 (fan-in without the kernel) would be " << 2.0 / 64);
}

TEST_CASE("he_uniform with a leaky slope and fan-out: Var W = 2/((1+a²) fan_out) (He et al. 2015)") {
  const fans f{300, 120, 1};
  const double a = 0.2;
  const auto x = draw(f, he_uniform(a, fan_basis::out).rule(), 200000, "he_uniform");
  const double var = 2.0 / ((1 + a * a) * 120);
  const double bound = std::sqrt(3 * var);
  for (double v : x) REQUIRE(std::abs(v) < bound);
  CHECK(kindling_test::variance_of(x) == doctest::Approx(var).epsilon(variance_tolerance(1.8, x.size())));
}

TEST_CASE("lecun_normal and lecun_uniform have variance 1/fan_in (LeCun et al. 1998)") {
  const fans f{500, 20, 1};
  SUBCASE("normal") {
    const auto x = draw(f, lecun_normal{}.rule(), 200000, "lecun_normal");
    CHECK(kindling_test::variance_of(x) == doctest::Approx(1.0 / 500).epsilon(variance_tolerance(3, x.size())));
  }
  SUBCASE("uniform") {
    const auto x = draw(f, lecun_uniform{}.rule(), 200000, "lecun_uniform");
    for (double v : x) REQUIRE(std::abs(v) < std::sqrt(3.0 / 500));
    CHECK(kindling_test::variance_of(x) == doctest::Approx(1.0 / 500).epsilon(variance_tolerance(1.8, x.size())));
  }
}

TEST_CASE("truncated variance scaling draws values whose variance is scale/fan, cut at 2 sigma") {
  // Truncated standard normal on [-2, 2]: sd 0.8796256610342398 (scipy.stats.truncnorm(-2, 2)).
  const fans f{400, 400, 1};
  const fan_scaled rule{2.0, fan_basis::in, draw_shape::truncated_normal, 2.0};
  const auto x = draw(f, rule, 200000, "truncated");
  const double var = 2.0 / 400;
  const double sigma = std::sqrt(var) / 0.8796256610342398;
  for (double v : x) REQUIRE(std::abs(v) <= 2 * sigma);
  // Kurtosis of the truncated normal on [-2, 2] is about 2.4 (below 3); 3 is a safe bound.
  CHECK(kindling_test::variance_of(x) == doctest::Approx(var).epsilon(variance_tolerance(3, x.size())));
  const double mass = kindling_test::normal_cdf(2) - kindling_test::normal_cdf(-2);
  const double d = ks_distance(x, [&](double t) {
    return (kindling_test::normal_cdf(t / sigma) - kindling_test::normal_cdf(-2)) / mass;
  });
  CHECK_MESSAGE(d < ks_critical(x.size()), "KS distance to the truncated normal is " << d);
}

TEST_CASE("He normal keeps the pre-activation variance of a ReLU layer: E[relu(z)^2] = 1/2 (He et al. 2015)") {
  // y = W relu(x), x ~ N(0, 1): Var y = fan_in Var W E[relu(z)^2] = fan_in (2/fan_in) (1/2) = 1.
  const std::uint64_t n = 512, batch = 64;
  std::vector<double> w(n * n), x(n * batch);
  initialize(strided_view<double>(w.data(), shape(n, n)), dense(n, n), he_normal{}, make_stream(3, "w"));
  fill(strided_view<double>(x.data(), shape(batch, n)), dist::normal{0, 1}, make_stream(3, "x"));
  std::vector<double> y;
  for (std::uint64_t b = 0; b < batch; ++b) {
    for (std::uint64_t o = 0; o < n; ++o) {
      double s = 0;
      for (std::uint64_t i = 0; i < n; ++i) s += w[o * n + i] * std::max(0.0, x[b * n + i]);
      y.push_back(s);
    }
  }
  // 32768 outputs, correlated through shared weights; 0.05 is over 6 standard errors.
  CHECK(kindling_test::variance_of(y) == doctest::Approx(1.0).epsilon(0.05));
}

TEST_CASE("LeCun normal with SELU units keeps mean 0 and variance 1 (Klambauer et al. 2017)") {
  const double alpha = 1.6732632423543772848, lambda = 1.0507009873554804934;
  const auto selu = [&](double z) { return lambda * (z > 0 ? z : alpha * (std::exp(z) - 1)); };
  const std::uint64_t n = 512, batch = 64;
  std::vector<double> w(n * n), x(n * batch);
  initialize(strided_view<double>(w.data(), shape(n, n)), dense(n, n), lecun_normal{}, make_stream(4, "w"));
  fill(strided_view<double>(x.data(), shape(batch, n)), dist::normal{0, 1}, make_stream(4, "x"));
  std::vector<double> a;
  for (std::uint64_t b = 0; b < batch; ++b) {
    for (std::uint64_t o = 0; o < n; ++o) {
      double s = 0;
      for (std::uint64_t i = 0; i < n; ++i) s += w[o * n + i] * selu(x[b * n + i]);
      a.push_back(selu(s));
    }
  }
  CHECK(std::abs(kindling_test::mean_of(a)) < 0.05);
  CHECK(kindling_test::variance_of(a) == doctest::Approx(1.0).epsilon(0.06));
}

TEST_CASE("fan_scaled rejects bad arguments before writing") {
  std::vector<float> w(12, 7.0f);
  const strided_view<float> v(w.data(), shape(3, 4));
  SUBCASE("zero fans") {
    CHECK_THROWS_AS(initialize(v, weight_info{fans{0, 3, 1}}, he_normal{}, make_stream(1, "w")), std::invalid_argument);
  }
  SUBCASE("non-finite gain") {
    CHECK_THROWS_AS(initialize(v, dense(4, 3), glorot_uniform(std::nan("")), make_stream(1, "w")), std::domain_error);
  }
  SUBCASE("negative scale") {
    const fan_scaled rule{-1.0, fan_basis::in, draw_shape::normal, 2.0};
    CHECK_THROWS_AS(initialize(v, dense(4, 3), rule, make_stream(1, "w")), std::domain_error);
  }
  SUBCASE("a layer that does not fit the view") {
    CHECK_THROWS_AS(initialize(v, dense(3, 4), glorot_uniform{}, make_stream(1, "w")), std::invalid_argument);
  }
  for (float x : w) CHECK(x == 7.0f);
}

TEST_CASE("glorot takes an activation for its gain, he takes a rectifier for its slope") {
  // Glorot with tanh: gain 5/3 (common practice, from gain.hpp's table_gain); with ReLU:
  // sqrt(2) (He et al., ICCV 2015). The variance is gain² · 2 / (fan_in + fan_out)
  // (Glorot & Bengio 2010, eq. 16, scaled by the gain).
  const fans f{120, 80, 1};
  CHECK(glorot_uniform{activation::tanh()}.gain == 5.0 / 3.0);
  CHECK(glorot_normal{activation::relu()}.variance(f) == doctest::Approx(2.0 * 2.0 / 200).epsilon(1e-15));
  CHECK(glorot_normal{activation::tanh()}.variance(f) == doctest::Approx(25.0 / 9.0 * 2.0 / 200).epsilon(1e-15));
  // He with a leaky ReLU of slope a: Var W = 2 / ((1 + a²) fan_in) (He et al. 2015, sec. 2.2).
  CHECK(he_normal{activation::leaky_relu(0.1)}.slope == 0.1);
  CHECK(he_normal{activation::leaky_relu(0.1)}.variance(f) == doctest::Approx(2.0 / (1.01 * 120)).epsilon(1e-15));
  CHECK(he_uniform{activation::relu(), fan_basis::out}.variance(f) == doctest::Approx(2.0 / 80).epsilon(1e-15));
  // He et al. derive the variance for rectifiers only: another activation is refused by name.
  for (const activation& a : {activation::tanh(), activation::selu()}) {
    const std::string msg = kindling_test::message_of<std::invalid_argument>([&] { he_normal{a}; });
    CHECK_MESSAGE(kindling_test::mentions(msg, "kindling::he_normal: argument 'activation' = " + std::string(a.name())),
                  msg);
    CHECK_MESSAGE(kindling_test::mentions(msg, "expected relu or leaky_relu"), msg);
  }
}
