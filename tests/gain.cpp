// Tests of include/kindling/gain.hpp.
//
// External values (from tests/REFERENCES.md unless noted):
//   E[relu(z)^2] = 1/2, so the ReLU gain is sqrt(2)             He et al., ICCV 2015
//   leaky ReLU gain sqrt(2 / (1 + a^2))                           He et al. 2015, eq. 14
//   E[tanh(z)^2] = 0.39429449039784126, 1/sqrt = 1.5925374197228312   scipy.integrate.quad
//   SELU fixed point E[selu(z)] = 0, E[selu(z)^2] = 1             Klambauer et al. 2017
//   tanh 5/3, sigmoid 1                                            common practice
// The live comparison of the computed gains with scipy is the ctest "detail: computed
// gains match scipy quad" (tests/detail/check_rules.py).
#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <stdexcept>
#include <string>

#include "kindling/gain.hpp"

using kindling::activation;

namespace {

const double pi = 3.14159265358979323846;

template <class F>
auto squared(F f) {
  return [f](double x) {
    const double y = f(x);
    return y * y;
  };
}

bool contains(std::string_view s, std::string_view part) {
  return s.find(part) != std::string_view::npos;
}

}  // namespace

TEST_CASE("table gains carry the published or common-practice value and its source") {
  SUBCASE("identity, sigmoid, tanh, ReLU, leaky ReLU, SELU") {
    CHECK(kindling::table_gain(activation::identity()).value == 1.0);
    const auto sigmoid = kindling::table_gain(activation::sigmoid());
    CHECK(sigmoid.value == 1.0);
    CHECK(contains(sigmoid.source, "common practice"));
    const auto tanh = kindling::table_gain(activation::tanh());
    CHECK(tanh.value == 5.0 / 3.0);
    CHECK(contains(tanh.source, "common practice, no published source"));
    const auto relu = kindling::table_gain(activation::relu());
    CHECK(relu.value == std::sqrt(2.0));
    CHECK(contains(relu.source, "He et al."));
    const auto leaky = kindling::table_gain(activation::leaky_relu(0.2));
    CHECK_MESSAGE(leaky.value == doctest::Approx(std::sqrt(2.0 / 1.04)).epsilon(1e-15),
                  "He et al. 2015 eq. 14 with a = 0.2");
    CHECK(contains(leaky.source, "eq. 14"));
    const auto selu = kindling::table_gain(activation::selu());
    CHECK_MESSAGE(selu.value == 1.0, "Klambauer et al. 2017: LeCun variance, gain 1");
    CHECK(contains(selu.source, "Klambauer"));
    for (const auto& a : {activation::identity(), activation::sigmoid(), activation::tanh(),
                          activation::relu(), activation::selu()}) {
      CHECK_FALSE(kindling::table_gain(a).computed);
    }
  }
  SUBCASE("ELU, GELU and SiLU entries are computed, and equal our quadrature") {
    for (const auto& a : {activation::elu(), activation::elu(0.5), activation::gelu(),
                          activation::silu()}) {
      CAPTURE(a.name());
      CAPTURE(a.parameter());
      const auto entry = kindling::table_gain(a);
      CHECK(entry.computed);
      CHECK(contains(entry.source, "computed"));
      CHECK_MESSAGE(entry.value == doctest::Approx(kindling::forward_gain(a)).epsilon(1e-14),
                    "the stored value is 1/sqrt(E[phi(z)^2])");
    }
  }
}

TEST_CASE("computed gains reproduce the published moments") {
  SUBCASE("ReLU: E[relu(z)^2] = 1/2 and E[relu'(z)^2] = 1/2 give sqrt(2) both ways (He et al. 2015)") {
    CHECK(kindling::gaussian_expectation_split(squared(activation::relu()), 0.0) ==
          doctest::Approx(0.5).epsilon(1e-15));
    CHECK(kindling::forward_gain(activation::relu()) == doctest::Approx(std::sqrt(2.0)).epsilon(1e-15));
    CHECK(kindling::backward_gain(activation::relu()) == doctest::Approx(std::sqrt(2.0)).epsilon(1e-15));
  }
  SUBCASE("leaky ReLU: computed equals He et al. eq. 14") {
    for (double a : {0.01, 0.2, -0.5, 3.0}) {
      const double he = std::sqrt(2.0 / (1.0 + a * a));
      CHECK(kindling::forward_gain(activation::leaky_relu(a)) == doctest::Approx(he).epsilon(1e-14));
      CHECK(kindling::backward_gain(activation::leaky_relu(a)) == doctest::Approx(he).epsilon(1e-14));
    }
  }
  SUBCASE("tanh: E[tanh(z)^2] = 0.39429449039784126 (scipy quad, this machine)") {
    // Split rule: 1e-15.  Plain Gauss-Hermite with 100 nodes: 6.5e-12 here, so 1e-11.
    CHECK(kindling::gaussian_expectation_split(squared(activation::tanh()), 0.0) ==
          doctest::Approx(0.39429449039784126).epsilon(1e-15));
    CHECK(kindling::gaussian_expectation(squared(activation::tanh())) ==
          doctest::Approx(0.39429449039784126).epsilon(1e-11));
    CHECK(kindling::forward_gain(activation::tanh()) ==
          doctest::Approx(1.5925374197228312).epsilon(1e-15));
    // A user callable without options goes through 100 Gauss-Hermite nodes.
    CHECK(kindling::forward_gain([](double x) { return std::tanh(x); }) ==
          doctest::Approx(1.5925374197228312).epsilon(1e-11));
  }
  SUBCASE("SELU fixed point: E[selu(z)] = 0, E[selu(z)^2] = 1 (Klambauer et al. 2017)") {
    // alpha = 1.6732632423543772848, lambda = 1.0507009873554804934 (the paper's digits).
    CHECK(kindling::selu_alpha == 1.6732632423543772848);
    CHECK(kindling::selu_lambda == 1.0507009873554804934);
    const auto selu = activation::selu();
    CHECK(std::fabs(kindling::gaussian_expectation_split(selu, 0.0)) < 1e-15);
    CHECK(kindling::gaussian_expectation_split(squared(selu), 0.0) == doctest::Approx(1.0).epsilon(1e-14));
    CHECK(kindling::forward_gain(selu) == doctest::Approx(1.0).epsilon(1e-14));
  }
  SUBCASE("identity: gain 1 both ways (LeCun et al. 1998)") {
    CHECK(kindling::forward_gain(activation::identity()) == doctest::Approx(1.0).epsilon(1e-15));
    CHECK(kindling::backward_gain(activation::identity()) == doctest::Approx(1.0).epsilon(1e-15));
  }
}

TEST_CASE("the backward gain by central differences agrees with the analytic derivative") {
  // Tolerance 1e-9: the difference quotient is accurate to about 1e-10 (gain.hpp).
  for (const auto& a : {activation::tanh(), activation::sigmoid(), activation::elu(),
                        activation::gelu(), activation::silu(), activation::selu()}) {
    CAPTURE(a.name());
    const kindling::quadrature_options opts{kindling::default_hermite_nodes, 0.0};
    const double numeric = kindling::backward_gain(kindling::central_difference(a), opts);
    CHECK(numeric == doctest::Approx(kindling::backward_gain(a)).epsilon(1e-9));
  }
  // tanh'(0) = 1 and |tanh'| < 1 elsewhere, so the backward gain exceeds 1.
  CHECK(kindling::backward_gain(activation::tanh()) > 1.0);
}

TEST_CASE("a kink makes plain Gauss-Hermite slow while the split rule stays accurate") {
  // E[relu(z)] = 1/sqrt(2 pi) (half-normal mean, standard).  The kink at 0 leaves 100
  // Gauss-Hermite nodes about 2e-3 off; the split rule is within 1e-15.
  const double exact = 1.0 / std::sqrt(2.0 * pi);
  const double plain = kindling::gaussian_expectation(activation::relu());
  const double split = kindling::gaussian_expectation_split(activation::relu(), 0.0);
  CHECK(std::fabs(plain - exact) > 1e-4);
  CHECK(split == doctest::Approx(exact).epsilon(1e-15));
}

TEST_CASE("gaussian expectations honour the mean and variance") {
  SUBCASE("polynomials are exact: E[x^2] = m^2 + v") {
    CHECK(kindling::gaussian_expectation([](double x) { return x * x; }, 1.5, 4.0, 8) ==
          doctest::Approx(6.25).epsilon(1e-14));
  }
  SUBCASE("log-normal mean E[exp(x)] = exp(m + v/2) (standard)") {
    const auto e = [](double x) { return std::exp(x); };
    CHECK(kindling::gaussian_expectation(e, -0.5, 2.0) == doctest::Approx(std::exp(0.5)).epsilon(1e-13));
    CHECK(kindling::gaussian_expectation_split(e, 0.3, -0.5, 2.0) ==
          doctest::Approx(std::exp(0.5)).epsilon(1e-14));
  }
  SUBCASE("tanh at variance 25: E[tanh(5 z)^2] = 0.8429617595625437 (scipy quad, this machine)") {
    const auto t2 = squared(activation::tanh());
    CHECK(kindling::gaussian_expectation_split(t2, 0.0, 0.0, 25.0) ==
          doctest::Approx(0.8429617595625437).epsilon(1e-14));
  }
  SUBCASE("variance 0 evaluates at the mean") {
    // volatile: a constant std::tanh(0.7) may be folded by the compiler to a value that
    // differs in the last bit from the run-time libm result.
    volatile double m = 0.7;
    const double at_mean = std::tanh(m);
    CHECK(kindling::gaussian_expectation(activation::tanh(), m, 0.0) == at_mean);
    CHECK(kindling::gaussian_expectation_split(activation::tanh(), 0.0, m, 0.0) == at_mean);
  }
  SUBCASE("a reusable rule gives the same value") {
    const kindling::gaussian_quadrature rule(40);
    CHECK(rule.nodes() == 40);
    const auto f = [](double x) { return std::cos(x); };
    CHECK(rule.expectation(f, 0.2, 0.5) == kindling::gaussian_expectation(f, 0.2, 0.5, 40));
    // E[cos(x)] = cos(m) exp(-v/2) (characteristic function of the normal).
    CHECK(rule.expectation(f, 0.2, 0.5) == doctest::Approx(std::cos(0.2) * std::exp(-0.25)).epsilon(1e-14));
  }
}

TEST_CASE("bad arguments to activations and expectations throw and name the argument") {
  constexpr double nan = std::numeric_limits<double>::quiet_NaN();
  constexpr double inf = std::numeric_limits<double>::infinity();
  const auto id = [](double x) { return x; };
  CHECK_THROWS_WITH_AS(activation::leaky_relu(nan), doctest::Contains("argument 'slope'"),
                       std::domain_error);
  CHECK_THROWS_WITH_AS(activation::elu(0.0), doctest::Contains("argument 'alpha' = 0,"),
                       std::domain_error);
  CHECK_THROWS_WITH_AS(activation::elu(inf), doctest::Contains("argument 'alpha'"), std::domain_error);
  CHECK_THROWS_WITH_AS(kindling::gaussian_expectation(id, 0.0, -1.0),
                       doctest::Contains("argument 'variance' = -1, expected a finite number >= 0"),
                       std::domain_error);
  CHECK_THROWS_WITH_AS(kindling::gaussian_expectation(id, inf, 1.0), doctest::Contains("argument 'mean'"),
                       std::domain_error);
  CHECK_THROWS_WITH_AS(kindling::gaussian_expectation(id, 0.0, 1.0, 0),
                       doctest::Contains("argument 'nodes' = 0"), std::invalid_argument);
  CHECK_THROWS_WITH_AS(kindling::gaussian_expectation_split(id, nan), doctest::Contains("argument 'split_at'"),
                       std::domain_error);
  CHECK_THROWS_WITH_AS(kindling::gaussian_expectation_split(id, 0.0, 0.0, nan),
                       doctest::Contains("argument 'variance'"), std::domain_error);
  CHECK_THROWS_WITH_AS(kindling::forward_gain([](double) { return 0.0; }),
                       doctest::Contains("E[phi(z)^2] = 0.000000, expected a finite positive value"),
                       std::domain_error);
  CHECK_THROWS_WITH_AS(kindling::backward_gain([](double) { return nan; }),
                       doctest::Contains("E[phi'(z)^2]"), std::domain_error);
}
