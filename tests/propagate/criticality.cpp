// Tests of propagate/criticality.hpp; tanh at sigma_b^2 > 0 is compared with scipy in
// tests/propagate/check_critical.py (ctest "propagate: tanh critical points match scipy").
#include "kindling/propagate/criticality.hpp"

#include <doctest/doctest.h>

#include <cmath>

#include "../support/errors.hpp"

using namespace kindling;

TEST_CASE("ReLU is critical at sigma_w^2 = 2 with sigma_b^2 = 0 (He et al. 2015; Poole et al. 2016)") {
  const critical_point c = find_critical_point(activation::relu(), 0.0);
  REQUIRE(c.exists);
  CHECK(c.weight_variance == doctest::Approx(2.0).epsilon(1e-14));
  CHECK(c.chi == doctest::Approx(1.0).epsilon(1e-14));
  CHECK(std::isinf(c.correlation_depth));
}

TEST_CASE("ReLU has no edge of chaos for sigma_b^2 > 0: chi = 1 - sigma_b^2 / q* < 1") {
  const critical_point c = find_critical_point(activation::relu(), 0.1);
  CHECK_FALSE(c.exists);
  CHECK(kindling_test::mentions(c.note, "does not change sign"));
}

TEST_CASE("tanh with sigma_b^2 = 0 is critical at sigma_w^2 = 1 with q* = 0 (Poole et al. 2016)") {
  const critical_point c = find_critical_point(activation::tanh(), 0.0);
  REQUIRE(c.exists);
  CHECK(c.weight_variance == doctest::Approx(1.0).epsilon(1e-10));
  CHECK(c.fixed_point == 0.0);
  CHECK(c.chi == doctest::Approx(1.0).epsilon(1e-10));
}

TEST_CASE("tanh critical points with sigma_b^2 > 0 are fixed points with chi = 1, sigma_w^2 rising with sigma_b^2") {
  double last = 1.0;
  for (double sb2 : {0.01, 0.05, 0.1, 0.3, 1.0}) {
    CAPTURE(sb2);
    const critical_point c = find_critical_point(activation::tanh(), sb2);
    REQUIRE(c.exists);
    CHECK(c.weight_variance > last);
    last = c.weight_variance;
    CHECK(length_map(activation::tanh(), c.fixed_point, c.weight_variance, sb2) ==
          doctest::Approx(c.fixed_point).epsilon(1e-12));
    CHECK(backward_factor(activation::tanh(), c.fixed_point, c.weight_variance) ==
          doctest::Approx(1.0).epsilon(1e-12));
    CHECK(c.length_slope < 1.0);  // the fixed point attracts: finite length depth
    CHECK(std::isfinite(c.length_depth));
    // the same point reached by iterating the length map from q = 1
    const fixed_point_result f = length_fixed_point(activation::tanh(), c.weight_variance, sb2);
    CHECK(f.q == doctest::Approx(c.fixed_point).epsilon(1e-9));
  }
}

TEST_CASE("find_critical_point refuses a negative bias variance") {
  CHECK(kindling_test::mentions(kindling_test::message_of<std::domain_error>(
                                    [] { find_critical_point(activation::tanh(), -0.1); }),
                                "'sigma_b2' = -0.10000000000000001"));
}
