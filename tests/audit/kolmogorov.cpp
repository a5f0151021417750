// Tests of audit/kolmogorov.hpp. The live comparison with scipy.stats.kstwo and
// scipy.stats.kstest is tests/audit/check_kolmogorov.py (run by ctest, extra.cmake).
#include "kindling/audit/kolmogorov.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <utility>
#include <vector>

#include "../support/errors.hpp"

using namespace kindling;

TEST_CASE("the limiting survival function gives the published Kolmogorov critical values") {
  // REFERENCES.md: c(0.05) = 1.3580986, c(0.01) = 1.6276236 (scipy.stats.kstwobign, verified).
  CHECK(kolmogorov_limit_survival(1.3580986) == doctest::Approx(0.05).epsilon(1e-6));
  CHECK(kolmogorov_limit_survival(1.6276236) == doctest::Approx(0.01).epsilon(1e-5));
  SUBCASE("its two series agree where they meet (x = 1)") {
    CHECK(kolmogorov_limit_survival(std::nextafter(1.0, 0.0)) == doctest::Approx(kolmogorov_limit_survival(1.0)).epsilon(1e-12));
  }
  SUBCASE("it falls from 1 to 0") {
    CHECK(kolmogorov_limit_survival(0.0) == 1.0);
    CHECK(kolmogorov_limit_survival(0.2) == doctest::Approx(1.0).epsilon(1e-12));
    CHECK(kolmogorov_limit_survival(4.0) < 1e-12);
  }
}

TEST_CASE("the exact distribution matches closed forms for one value") {
  // D_1 = max(u, 1 - u) for one uniform u, so P(D_1 < d) = 2d - 1 on [1/2, 1] (direct
  // calculation).
  for (double d : {0.55, 0.7, 0.9}) CHECK(kolmogorov_exact_cdf(1, d) == doctest::Approx(2 * d - 1).epsilon(1e-12));
  // P(D_n < 1/(2n)) = 0 and P(D_n < 1) = 1 (the support of D_n is [1/(2n), 1]).
  CHECK(kolmogorov_exact_cdf(10, 0.049) == doctest::Approx(0.0).epsilon(1e-12));
  CHECK(kolmogorov_exact_cdf(10, 1.0) == 1.0);
}

TEST_CASE("the exact and the limiting p-values agree for large n") {
  // Both describe the same law; at n = 5000 they differ by well under 1% of p.
  for (double x : {0.8, 1.0, 1.3580986, 1.6276236}) {
    const double d = x / std::sqrt(5000.0);
    const double exact = 1 - kolmogorov_exact_cdf(5000, d);
    const double limit = kolmogorov_limit_survival((std::sqrt(5000.0) + 0.12 + 0.11 / std::sqrt(5000.0)) * d);
    CHECK(limit == doctest::Approx(exact).epsilon(0.01));
  }
  CHECK(ks_p_value(1000, 0.05).method == ks_method::exact);
  CHECK(ks_p_value(5000, 0.01).method == ks_method::limiting);  // n above ks_exact_limit
  CHECK(ks_p_value(200000, 0.01).method == ks_method::limiting);
}

TEST_CASE("ks_p_value is fast and finite for any n") {
  // n = 2^40 with a tiny D: the exact path would loop over n; the limit answers at once.
  const ks_result r = ks_p_value(std::uint64_t{1} << 40, 1e-7);
  CHECK(r.method == ks_method::limiting);
  CHECK(r.p_value > 0.9);
  CHECK(r.p_value <= 1.0);
}

TEST_CASE("the statistic counts tied values as one step") {
  // Four values against U(0, 1): D = max over steps, worked by hand.
  const auto cdf = [](double x) { return std::min(1.0, std::max(0.0, x)); };
  CHECK(ks_statistic_sorted({0.1, 0.4, 0.6, 0.9}, cdf) == doctest::Approx(0.15));
  // Two ties at 0.5: the empirical CDF jumps from 0.25 to 0.75 there.
  CHECK(ks_statistic_sorted({0.1, 0.5, 0.5, 0.9}, cdf) == doctest::Approx(0.25));
}

TEST_CASE("bad input to the Kolmogorov-Smirnov functions names the argument") {
  using kindling_test::message_of;
  using kindling_test::mentions;
  CHECK(mentions(message_of<std::invalid_argument>([] { (void)ks_p_value(0, 0.1); }), "'n' = 0"));
  CHECK(mentions(message_of<std::domain_error>([] { (void)ks_p_value(10, 1.5); }), "'d' = 1.5"));
  CHECK(mentions(message_of<std::invalid_argument>([] { (void)ks_test(std::vector<double>{}, [](double) { return 0.0; }); }),
                 "'values' is empty"));
}

TEST_CASE("the statistic over a discrete sample's distinct values is the supremum over every atom") {
  // A null on the atoms 0..9 with masses (k + 1) / 55, and a sample of 100 values that
  // misses some atoms: the brute force takes |F_n - F| at every atom, seen or not.
  std::vector<std::uint64_t> counts{5, 0, 0, 20, 11, 0, 30, 4, 0, 30};
  const auto cdf = [](double x) {  // P(X <= x)
    double p = 0;
    for (int k = 0; k <= 9 && k <= x; ++k) p += (k + 1) / 55.0;
    return p;
  };
  const auto below = [&](double x) { return cdf(x - 0.5); };  // P(X < x) for an atom x
  double brute = 0, seen = 0;
  for (int k = 0; k <= 9; ++k) {
    brute = std::max(brute, std::fabs(seen / 100 - below(k)));
    seen += static_cast<double>(counts[static_cast<std::size_t>(k)]);
    brute = std::max(brute, std::fabs(seen / 100 - cdf(k)));
  }
  std::vector<std::pair<double, std::uint64_t>> atoms;
  for (int k = 0; k <= 9; ++k) {
    if (counts[static_cast<std::size_t>(k)] != 0) atoms.emplace_back(k, counts[static_cast<std::size_t>(k)]);
  }
  CHECK(ks_statistic_atoms(atoms, 100, below, cdf) == doctest::Approx(brute).epsilon(1e-15));
  CHECK(brute > 0.1);  // the sample is far from the null: the check is not vacuous
}
