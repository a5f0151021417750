// Test-side statistics: Kolmogorov–Smirnov distance and moment checks against exact
// reference CDFs written with the standard library (std::erfc), independent of the
// library's own deterministic math.
#ifndef KINDLING_TESTS_SUPPORT_STATS_HPP
#define KINDLING_TESTS_SUPPORT_STATS_HPP

#include <algorithm>
#include <cmath>
#include <functional>
#include <vector>

namespace kindling_test {

// Kolmogorov limiting critical value at significance 0.01 (Smirnov's limiting
// distribution; scipy.stats.kstwobign.isf(0.01) = 1.6276236, REFERENCES.md).
inline constexpr double ks_c001 = 1.6276236;

inline double ks_distance(std::vector<double> x, const std::function<double(double)>& cdf) {
  std::sort(x.begin(), x.end());
  const double n = static_cast<double>(x.size());
  double d = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const double f = cdf(x[i]);
    d = std::max(d, std::max(f - static_cast<double>(i) / n, static_cast<double>(i + 1) / n - f));
  }
  return d;
}

// D_crit = c / sqrt(n): a sample of the right distribution exceeds it with probability
// about 0.01 (less for discrete data).
inline double ks_critical(std::size_t n, double c = ks_c001) { return c / std::sqrt(static_cast<double>(n)); }

inline double normal_cdf(double z) { return 0.5 * std::erfc(-z / std::sqrt(2.0)); }

inline double mean_of(const std::vector<double>& x) {
  double s = 0;
  for (double v : x) s += v;
  return s / static_cast<double>(x.size());
}
inline double variance_of(const std::vector<double>& x) {
  const double m = mean_of(x);
  double s = 0;
  for (double v : x) s += (v - m) * (v - m);
  return s / static_cast<double>(x.size() - 1);
}

// Pearson correlation of two equally long samples.
inline double correlation(const std::vector<double>& a, const std::vector<double>& b) {
  const double ma = mean_of(a), mb = mean_of(b);
  double sab = 0, saa = 0, sbb = 0;
  for (std::size_t i = 0; i < a.size(); ++i) {
    sab += (a[i] - ma) * (b[i] - mb);
    saa += (a[i] - ma) * (a[i] - ma);
    sbb += (b[i] - mb) * (b[i] - mb);
  }
  return sab / std::sqrt(saa * sbb);
}

}  // namespace kindling_test

#endif
