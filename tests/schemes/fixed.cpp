// Tests of schemes/fixed.hpp: explicitly parameterized uniform, normal, truncated normal.
#include <doctest/doctest.h>

#include <vector>

#include "../support/stats.hpp"
#include "kindling/schemes/fixed.hpp"

using namespace kindling;

TEST_CASE("fixed_truncated_normal draws values with the requested standard deviation") {
  // The underlying sigma is stddev / 0.8796256610342398 (truncated standard normal on
  // [-2, 2]: scipy.stats.truncnorm(-2, 2).std()); values never pass mean ± 2 sigma.
  std::vector<double> x(400000);
  initialize(strided_view<double>(x.data(), shape(x.size())), weight_info{fans{1, 1, 1}},
             fixed_truncated_normal{0.5, 0.02, 2.0}, make_stream(3, "emb"));
  const double sigma = 0.02 / 0.8796256610342398;
  for (double v : x) REQUIRE(std::abs(v - 0.5) <= 2 * sigma);
  // 6 standard errors of the sample sd (relative ~ sqrt((kurt - 1)/(4n)), kurt ~ 2.4).
  CHECK(std::sqrt(kindling_test::variance_of(x)) == doctest::Approx(0.02).epsilon(6 * std::sqrt(1.4 / 1.6e6)));
  CHECK(kindling_test::mean_of(x) == doctest::Approx(0.5).epsilon(1e-4));
}

TEST_CASE("fixed_uniform and fixed_normal use their parameters as given") {
  std::vector<float> x(200000);
  const strided_view<float> v(x.data(), shape(x.size()));
  initialize(v, weight_info{fans{1, 1, 1}}, fixed_uniform{-0.5, 1.5}, make_stream(3, "u"));
  for (float t : x) REQUIRE((t >= -0.5f && t < 1.5f));
  std::vector<double> d(x.begin(), x.end());
  CHECK(kindling_test::ks_distance(d, [](double t) { return (t + 0.5) / 2; }) < kindling_test::ks_critical(d.size()));
  initialize(v, weight_info{fans{1, 1, 1}}, fixed_normal{1.0, 0.1}, make_stream(3, "n"));
  d.assign(x.begin(), x.end());
  CHECK(kindling_test::ks_distance(d, [](double t) { return kindling_test::normal_cdf((t - 1) / 0.1); }) <
        kindling_test::ks_critical(d.size()));
}

TEST_CASE("fixed schemes reject bad parameters before writing") {
  std::vector<float> x(4, 5.0f);
  const strided_view<float> v(x.data(), shape(4));
  CHECK_THROWS(initialize(v, weight_info{fans{1, 1, 1}}, fixed_uniform{1.0, 1.0}, make_stream(1, "u")));
  CHECK_THROWS(initialize(v, weight_info{fans{1, 1, 1}}, fixed_normal{0.0, -1.0}, make_stream(1, "n")));
  CHECK_THROWS(initialize(v, weight_info{fans{1, 1, 1}}, fixed_truncated_normal{0.0, 1.0, 0.0}, make_stream(1, "t")));
  for (float t : x) CHECK(t == 5.0f);
}
