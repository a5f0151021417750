# Live cross-check of the Kolmogorov-Smirnov test against scipy (Debian python3-scipy,
# run with /usr/bin/python3): a small program prints our p-values on a grid of (n, d)
# and our statistic and p-value for samples drawn by kindling; check_kolmogorov.py
# recomputes them with scipy.stats.kstwo, scipy.stats.kstwobign and scipy.stats.kstest.
# (The source is written here: a .cpp in tests/audit would be globbed into the doctest binary.)
set(_kindling_ks_source ${CMAKE_CURRENT_BINARY_DIR}/kindling_audit_ks_print.cpp)
file(WRITE ${_kindling_ks_source} [=[
// Prints Kolmogorov-Smirnov values for tests/audit/check_kolmogorov.py.
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
]=])
add_executable(kindling_audit_ks_print ${_kindling_ks_source})
target_link_libraries(kindling_audit_ks_print PRIVATE kindling kindling_warnings)
if(TARGET kindling_test_audit)
  add_dependencies(kindling_test_audit kindling_audit_ks_print)
endif()

add_test(NAME "audit: Kolmogorov-Smirnov statistics and p-values match scipy kstwo, kstwobign and kstest"
         COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/audit/check_kolmogorov.py
                 $<TARGET_FILE:kindling_audit_ks_print>)
