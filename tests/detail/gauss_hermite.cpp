// Tests of include/kindling/detail/gauss_hermite.hpp.
//
// External checks: Abramowitz & Stegun, Handbook of Mathematical Functions, Table 25.10
// (Gauss-Hermite, weight exp(-x^2)) and Table 25.4 (Gauss-Legendre).  The table values
// below are quoted from memory to 15 digits and were verified on this machine with
// numpy.polynomial.hermite.hermgauss and numpy.polynomial.legendre.leggauss (numpy
// 1.24.2) before being committed.  The full comparison with numpy's
// hermite_e.hermegauss for n up to 200 is the ctest "detail: Gauss-Hermite rules
// match numpy hermegauss" (tests/detail/check_rules.py).
#include <doctest/doctest.h>

#include <cmath>
#include <cstddef>
#include <stdexcept>
#include <string>
#include <vector>

#include "kindling/detail/gauss_hermite.hpp"

using kindling::detail::gauss_hermite_rule;
using kindling::detail::gauss_legendre_rule;

namespace {

const double sqrt2 = std::sqrt(2.0);
const double sqrt_pi = std::sqrt(3.14159265358979323846);

struct table_row {
  double node;    // physicists' node x_i >= 0
  double weight;  // physicists' weight for exp(-x^2)
};

// Our rule is for exp(-x^2/2)/sqrt(2 pi): node = sqrt(2) x_i, weight = w_i / sqrt(pi).
void check_against_table(std::size_t n, const std::vector<table_row>& rows) {
  const auto rule = gauss_hermite_rule(n);
  REQUIRE(rule.nodes.size() == n);
  for (const auto& row : rows) {
    bool found = false;
    for (std::size_t i = 0; i < n; ++i) {
      if (std::fabs(rule.nodes[i] - sqrt2 * row.node) < 1e-9) {
        found = true;
        CHECK_MESSAGE(rule.nodes[i] == doctest::Approx(sqrt2 * row.node).epsilon(1e-14),
                      "node matches A&S 25.10 times sqrt(2)");
        CHECK_MESSAGE(rule.weights[i] == doctest::Approx(row.weight / sqrt_pi).epsilon(1e-13),
                      "weight matches A&S 25.10 divided by sqrt(pi)");
      }
    }
    CHECK_MESSAGE(found, "A&S 25.10 node " << row.node << " (n = " << n << ") is in the rule");
  }
}

double double_factorial_odd(int k) {  // (2k-1)!!, the 2k-th moment of N(0, 1)
  double p = 1.0;
  for (int j = 2 * k - 1; j > 1; j -= 2) p *= j;
  return p;
}

}  // namespace

TEST_CASE("Gauss-Hermite nodes and weights reproduce Abramowitz & Stegun Table 25.10") {
  // A&S Table 25.10, from memory (verified with numpy hermgauss).
  check_against_table(2, {{0.707106781186548, 0.886226925452758}});
  check_against_table(3, {{0.0, 1.181635900603677}, {1.224744871391589, 0.295408975150919}});
  check_against_table(4, {{0.524647623275290, 0.804914090005513},
                          {1.650680123885785, 0.081312835447245}});
  check_against_table(5, {{0.0, 0.945308720482942},
                          {0.958572464613819, 0.393619323152241},
                          {2.020182870456086, 0.019953242059046}});
  check_against_table(10, {{0.342901327223705, 0.610862633735326},
                           {1.036610829789514, 0.240138611082315},
                           {1.756683649299882, 0.033874394455481},
                           {2.532731674232790, 0.001343645746781},
                           {3.436159118837738, 0.000007640432856}});
}

TEST_CASE("Gauss-Hermite rules are symmetric probability rules exact to degree 2n-1") {
  for (std::size_t n : {1u, 2u, 7u, 20u, 64u, 100u, 151u, 200u}) {
    CAPTURE(n);
    const auto rule = gauss_hermite_rule(n);
    double total = 0.0;
    for (std::size_t i = 0; i < n; ++i) {
      total += rule.weights[i];
      CHECK(rule.weights[i] > 0.0);
      CHECK(rule.nodes[i] == -rule.nodes[n - 1 - i]);
      if (i > 0) CHECK(rule.nodes[i] > rule.nodes[i - 1]);
    }
    CHECK_MESSAGE(total == doctest::Approx(1.0).epsilon(2e-15), "weights sum to 1 = E[1]");
    // Moments of N(0, 1): E[z^2k] = (2k-1)!! (standard), exact while 2k <= 2n - 1.
    for (int k = 1; 2 * k <= static_cast<int>(2 * n - 1) && k <= 12; ++k) {
      double m = 0.0;
      for (std::size_t i = 0; i < n; ++i) m += rule.weights[i] * std::pow(rule.nodes[i], 2 * k);
      CHECK_MESSAGE(m == doctest::Approx(double_factorial_odd(k)).epsilon(1e-12),
                    "E[z^" << 2 * k << "] = (2k-1)!!");
    }
  }
}

TEST_CASE("Gauss-Legendre rules reproduce Abramowitz & Stegun Table 25.4 and integrate polynomials") {
  // A&S Table 25.4, n = 5, from memory (verified with numpy leggauss).
  const auto rule = gauss_legendre_rule(5);
  const double nodes[] = {-0.906179845938664, -0.538469310105683, 0.0, 0.538469310105683,
                          0.906179845938664};
  const double weights[] = {0.236926885056189, 0.478628670499366, 0.568888888888889,
                            0.478628670499366, 0.236926885056189};
  for (std::size_t i = 0; i < 5; ++i) {
    CHECK(rule.nodes[i] == doctest::Approx(nodes[i]).epsilon(1e-14));
    CHECK(rule.weights[i] == doctest::Approx(weights[i]).epsilon(1e-14));
  }
  for (std::size_t n : {1u, 4u, 20u, 41u}) {
    const auto r = gauss_legendre_rule(n);
    for (int d = 0; d <= static_cast<int>(2 * n - 1) && d <= 20; ++d) {
      double s = 0.0;
      for (std::size_t i = 0; i < n; ++i) s += r.weights[i] * std::pow(r.nodes[i], d);
      const double exact = d % 2 == 1 ? 0.0 : 2.0 / (d + 1);
      CHECK_MESSAGE(s == doctest::Approx(exact).epsilon(1e-14).scale(1.0),
                    "integral of x^" << d << " over [-1, 1] with n = " << n);
    }
  }
}

TEST_CASE("quadrature rules refuse node counts outside 1..200") {
  for (std::size_t bad : {std::size_t{0}, std::size_t{201}}) {
    CHECK_THROWS_WITH_AS(gauss_hermite_rule(bad),
                         doctest::Contains(("argument 'nodes' = " + std::to_string(bad) +
                                            ", expected 1 to 200").c_str()),
                         std::invalid_argument);
    CHECK_THROWS_AS(gauss_legendre_rule(bad), std::invalid_argument);
  }
}
