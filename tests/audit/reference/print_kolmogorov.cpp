// Prints Kolmogorov-Smirnov values for tests/audit/check_kolmogorov.py.
// Not a doctest file: reference/ is outside the glob of tests/CMakeLists.txt, so this
// program keeps its own main (built by kindling_reference_check).
#include <cmath>
#include <cstdio>
#include <vector>
#include "kindling/audit/detail/declared.hpp"
#include "kindling/audit/kolmogorov.hpp"
#include "kindling/fill.hpp"
#include "kindling/random/stream.hpp"

using namespace kindling;

template <class D>
void sample(const char* name, const D& d, std::size_t n, std::uint64_t seed, double shift, double a, double b,
            double c, double e) {
  std::vector<double> x(n);
  fill(strided_view<double>(x.data(), shape(n)), d, make_stream(seed, "ks"));
  for (double& v : x) v += shift;  // a shift makes the alternative, so small p-values are compared too
  const detail::declared dd = detail::declare(d);
  const ks_result r = ks_test(x, [&dd](double v) { return dd.cdf(v); });
  std::printf("sample %s %.17g %.17g %.17g %.17g %.17g %.17g %d", name, a, b, c, e, r.statistic, r.p_value,
              r.method == ks_method::exact ? 1 : 0);
  for (double v : x) std::printf(" %.17g", v);
  std::printf("\n");
}

int main() {
  for (double x = 0.3; x < 3.0; x += 0.1) std::printf("limit %.17g %.17g\n", x, kolmogorov_limit_survival(x));
  for (std::uint64_t n : {5u, 20u, 100u, 1000u, 5000u, 20000u, 100000u, 1000000u}) {
    for (double c : {0.5, 0.8, 1.0, 1.2, 1.3580986, 1.6276236, 2.0}) {
      const double d = c / std::sqrt(static_cast<double>(n));
      if (d >= 1) continue;
      const ks_result r = ks_p_value(n, d);
      std::printf("pvalue %llu %.17g %.17g %d\n", static_cast<unsigned long long>(n), d, r.p_value,
                  r.method == ks_method::exact ? 1 : 0);
    }
  }
  for (std::uint64_t seed = 1; seed <= 4; ++seed) {
    sample("norm", dist::normal{0.5, 2.0}, 300, seed, 0.0, 0.5, 2.0, 0, 0);
    sample("norm", dist::normal{0.0, 1.0}, 2000, seed, 0.06, 0.0, 1.0, 0, 0);
    sample("uniform", dist::uniform{-1.0, 3.0}, 1000, seed, 0.0, -1.0, 4.0, 0, 0);
    sample("truncnorm", dist::truncated_normal{0.0, 0.7, -2.0, 2.0}, 1500, seed, 0.0, -2.0, 2.0, 0.0, 0.7);
  }
  return 0;
}
