// kindling/audit/kolmogorov.hpp: the one-sample Kolmogorov–Smirnov test.
//
//   D_n = sup_x |F_n(x) - F(x)|, F_n the empirical CDF of n values, F the declared CDF.
//
// p-value P(D_n >= d) under the declared distribution:
//   - exact, by Marsaglia, Tsang & Wang, "Evaluating Kolmogorov's distribution",
//     J. Stat. Software 8(18), 2003 (Durbin's matrix formula, 1973), when the matrix it
//     powers is at most 201 x 201 (n d < 100) and n <= ks_exact_limit (1000). Their tail shortcut is kept only for d² n > 7.24,
//     where p < 1e-6 (it loses digits for 3.76 < d² n < 7.24, measured against scipy).
//   - otherwise from Kolmogorov's limiting distribution
//       Q(x) = 2 Σ_{k>=1} (-1)^{k-1} exp(-2 k² x²)   (x >= 1),
//       1 - Q(x) = √(2π)/x Σ_{k>=1} exp(-(2k-1)² π² / (8 x²))   (x < 1, same function),
//     at x = (√n + 0.12 + 0.11/√n) d, the finite-n correction of Stephens (J. R. Stat.
//     Soc. B 32, 1970; from memory), good to about 1% of p for n >= 100.
// tests/audit/check_kolmogorov.py compares both against scipy.stats.kstwo and kstest.
#ifndef KINDLING_AUDIT_KOLMOGOROV_HPP
#define KINDLING_AUDIT_KOLMOGOROV_HPP

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>
#include <utility>

namespace kindling {

namespace detail {

inline constexpr double ks_pi = 3.14159265358979323846;

// Durbin's matrix H (m x m) raised to the power n with a decimal exponent kept apart,
// as in Marsaglia, Tsang & Wang's mPower: values are rescaled by 1e-140 when the
// centre entry passes 1e140.
inline void ks_matrix_power(const std::vector<double>& a, int ea, std::vector<double>& v, int& ev,
                            std::size_t m, std::uint64_t n) {
  if (n == 1) {
    v = a;
    ev = ea;
    return;
  }
  ks_matrix_power(a, ea, v, ev, m, n / 2);
  auto multiply = [m](const std::vector<double>& x, const std::vector<double>& y) {
    std::vector<double> c(m * m, 0.0);
    for (std::size_t i = 0; i < m; ++i) {
      for (std::size_t k = 0; k < m; ++k) {
        const double xik = x[i * m + k];
        if (xik == 0) continue;
        for (std::size_t j = 0; j < m; ++j) c[i * m + j] += xik * y[k * m + j];
      }
    }
    return c;
  };
  std::vector<double> b = multiply(v, v);
  int eb = 2 * ev;
  if (n % 2 == 0) {
    v = std::move(b);
    ev = eb;
  } else {
    v = multiply(a, b);
    ev = ea + eb;
  }
  if (v[(m / 2) * m + m / 2] > 1e140) {
    for (double& x : v) x *= 1e-140;
    ev += 140;
  }
}

}  // namespace detail

/// Q(x) = P(√n D_n > x) in the limit n → ∞ (Kolmogorov 1933; Smirnov 1948). The
/// critical values c(0.05) = 1.3580986 and c(0.01) = 1.6276236 solve Q(c) = alpha.
inline double kolmogorov_limit_survival(double x) {
  if (!(x > 0)) return 1.0;
  if (x < 1.0) {
    // Jacobi-theta form, fast for small x.
    const double c = -detail::ks_pi * detail::ks_pi / (8 * x * x);
    double sum = 0;
    for (int k = 1; k <= 7; k += 2) sum += std::exp(c * k * k);  // k = 2j - 1
    return 1.0 - std::sqrt(2 * detail::ks_pi) / x * sum;
  }
  double sum = 0, sign = 1;
  for (int k = 1; k <= 100; ++k) {
    const double term = std::exp(-2.0 * k * k * x * x);
    sum += sign * term;
    if (term < 1e-18) break;
    sign = -sign;
  }
  return std::min(1.0, std::max(0.0, 2 * sum));
}

/// P(D_n < d) by Marsaglia, Tsang & Wang (2003), exact up to rounding; n >= 1, the
/// matrix is (2⌊n d⌋ + 1)² so the caller keeps n d moderate.
inline double kolmogorov_exact_cdf(std::uint64_t n, double d) {
  if (n == 0) throw std::invalid_argument("kindling::kolmogorov_exact_cdf: argument 'n' = 0, expected >= 1");
  if (!(d > 0)) return 0.0;
  if (d >= 1) return 1.0;
  const double nd = static_cast<double>(n) * d;
  const double s = d * nd;
  if (s > 7.24) {
    const double rn = static_cast<double>(n);
    return 1 - 2 * std::exp(-(2.000071 + .331 / std::sqrt(rn) + 1.409 / rn) * s);
  }
  const std::size_t k = static_cast<std::size_t>(nd) + 1;
  const std::size_t m = 2 * k - 1;
  const double h = static_cast<double>(k) - nd;
  std::vector<double> H(m * m);
  for (std::size_t i = 0; i < m; ++i) {
    for (std::size_t j = 0; j < m; ++j) H[i * m + j] = (i + 1 >= j) ? 1.0 : 0.0;
  }
  for (std::size_t i = 0; i < m; ++i) {
    H[i * m] -= std::pow(h, static_cast<double>(i + 1));
    H[(m - 1) * m + i] -= std::pow(h, static_cast<double>(m - i));
  }
  H[(m - 1) * m] += (2 * h - 1 > 0 ? std::pow(2 * h - 1, static_cast<double>(m)) : 0.0);
  for (std::size_t i = 0; i < m; ++i) {
    for (std::size_t j = 0; j < m; ++j) {
      if (i + 1 > j) {
        for (std::size_t g = 1; g <= i + 1 - j; ++g) H[i * m + j] /= static_cast<double>(g);
      }
    }
  }
  std::vector<double> Q;
  int eq = 0;
  detail::ks_matrix_power(H, 0, Q, eq, m, n);
  double p = Q[(k - 1) * m + k - 1];
  const double rn = static_cast<double>(n);
  for (std::uint64_t i = 1; i <= n; ++i) {
    p = p * static_cast<double>(i) / rn;
    if (p < 1e-140) {
      p *= 1e140;
      eq -= 140;
    }
  }
  return p * std::pow(10.0, eq);
}

/// How a Kolmogorov–Smirnov p-value was computed.
enum class ks_method { exact, limiting };

struct ks_result {
  double statistic = 0;  // D_n
  double p_value = 1;    // P(D_n >= statistic) under the declared CDF
  std::uint64_t n = 0;
  ks_method method = ks_method::exact;
};

/// Up to this many values the p-value may be exact. Beyond, the exact computation costs
/// up to a 201 x 201 matrix power and a loop over n (0.1 s at n = 10^4), while
/// Stephens' corrected limit is within 2% of it (tests/audit/check_kolmogorov.py, against
/// scipy.stats.kstwo at n = 5000 to 10^6).
inline constexpr std::uint64_t ks_exact_limit = 1000;

/// The p-value of D_n = d: exact (Marsaglia–Tsang–Wang) while n d < 100 and n <=
/// ks_exact_limit, else the limiting distribution at Stephens' corrected argument.
inline ks_result ks_p_value(std::uint64_t n, double d) {
  if (n == 0) throw std::invalid_argument("kindling::ks_p_value: argument 'n' = 0, expected >= 1");
  if (!(d >= 0) || d > 1) {
    throw std::domain_error("kindling::ks_p_value: argument 'd' = " + std::to_string(d) +
                            ", expected a statistic in [0, 1]");
  }
  ks_result r;
  r.n = n;
  r.statistic = d;
  const double rn = static_cast<double>(n);
  if (rn * d < 100 && n <= ks_exact_limit) {
    r.method = ks_method::exact;
    r.p_value = std::min(1.0, std::max(0.0, 1.0 - kolmogorov_exact_cdf(n, d)));
  } else {
    r.method = ks_method::limiting;
    r.p_value = kolmogorov_limit_survival((std::sqrt(rn) + 0.12 + 0.11 / std::sqrt(rn)) * d);
  }
  return r;
}

/// D_n of values already sorted ascending against cdf (values finite). Tied values are
/// one step of the empirical CDF, so element types with few values (float16) are
/// measured at the steps they really have.
template <class Cdf>
double ks_statistic_sorted(const std::vector<double>& sorted, const Cdf& cdf) {
  const std::size_t n = sorted.size();
  const double rn = static_cast<double>(n);
  double d = 0;
  for (std::size_t i = 0; i < n;) {
    std::size_t j = i;
    while (j + 1 < n && sorted[j + 1] == sorted[i]) ++j;
    const double f = cdf(sorted[i]);
    d = std::max(d, std::max(static_cast<double>(j + 1) / rn - f, f - static_cast<double>(i) / rn));
    i = j + 1;
  }
  return d;
}

/// D = max_j |C_j / n - G_j| over the edges j = 1..m of a grid of m + 1 bins: counts[k]
/// values fell into bin k, C_j = counts[0] + ... + counts[j - 1] lie below edge j, and
/// below_edge(j) = G_j is the probability of a value below edge j under the declared
/// distribution. Both C and G rise from edge to edge, so between two edges a and b,
/// |C - G| <= max(C_b / n - G_a, G_b - C_a / n): G is evaluated at every 16th edge
/// first, and then only inside the stretches whose bound exceeds the largest deviation
/// found (branch and bound). The result is exact; it is the statistic of the values
/// grouped into the bins, which is at most the ungrouped one, so its p-value from the
/// Kolmogorov distribution is conservative, as for any discontinuous null (Noether,
/// 1963; Conover, JASA 1972; from memory, and measured in tests/audit/conformance.cpp).
template <class BelowEdge>
double ks_statistic_binned(const std::vector<std::uint64_t>& counts, std::uint64_t n, const BelowEdge& below_edge) {
  const std::uint32_t m = static_cast<std::uint32_t>(counts.size() - 1);
  std::vector<std::uint64_t> c(std::size_t{m} + 1, 0);  // c[j] = values below edge j
  for (std::uint32_t j = 1; j <= m; ++j) c[j] = c[j - 1] + counts[j - 1];
  const double rn = static_cast<double>(n);
  double d = 0;
  const auto at = [&](std::uint32_t j, double g) { d = std::max(d, std::fabs(static_cast<double>(c[j]) / rn - g)); };
  constexpr std::uint32_t stride = 16;
  std::vector<std::uint32_t> coarse;
  for (std::uint32_t j = 1; j < m; j += stride) coarse.push_back(j);
  coarse.push_back(m);
  std::vector<double> g(coarse.size());
  for (std::size_t k = 0; k < coarse.size(); ++k) {
    g[k] = below_edge(coarse[k]);
    at(coarse[k], g[k]);
  }
  struct stretch {
    double bound;
    std::size_t k;  // between coarse[k] and coarse[k + 1]
  };
  std::vector<stretch> open;
  for (std::size_t k = 0; k + 1 < coarse.size(); ++k) {
    const double ca = static_cast<double>(c[coarse[k]]) / rn, cb = static_cast<double>(c[coarse[k + 1]]) / rn;
    open.push_back({std::max(cb - g[k], g[k + 1] - ca), k});
  }
  std::sort(open.begin(), open.end(), [](const stretch& a, const stretch& b) { return a.bound > b.bound; });
  for (const stretch& s : open) {
    if (s.bound <= d) break;
    for (std::uint32_t j = coarse[s.k] + 1; j < coarse[s.k + 1]; ++j) at(j, below_edge(j));
  }
  return d;
}

/// D = sup_x |F_n(x) - F(x)| for a sample of few distinct values (the atoms of a 16-bit
/// element type): `atoms` holds each distinct value with its count, in increasing order
/// of value; below(x) = P(X < x) and at_most(x) = P(X <= x) under the null, a discrete
/// distribution whose jumps include every value the sample can hold. Between two
/// sample values F_n is constant and F rises, so the supremum is reached just below a
/// sample value or at one: the statistic is exact (no grouping), and its p-value from
/// the Kolmogorov distribution is conservative for the discrete null (Noether, 1963;
/// Conover, JASA 1972; from memory, and measured in tests/audit/conformance.cpp).
template <class Below, class AtMost>
double ks_statistic_atoms(const std::vector<std::pair<double, std::uint64_t>>& atoms, std::uint64_t n,
                          const Below& below, const AtMost& at_most) {
  const double rn = static_cast<double>(n);
  std::uint64_t cumulative = 0;
  double d = 0;
  for (const auto& a : atoms) {
    d = std::max(d, std::fabs(static_cast<double>(cumulative) / rn - below(a.first)));
    cumulative += a.second;
    d = std::max(d, std::fabs(static_cast<double>(cumulative) / rn - at_most(a.first)));
  }
  return d;
}

/// The D at which the p-value from Kolmogorov's limit (with Stephens' correction) is
/// alpha: the critical value a check with n values uses, for reports.
inline double ks_critical_value(std::uint64_t n, double alpha) {
  double lo = 0, hi = 4;  // in units of the corrected argument x
  for (int i = 0; i < 100; ++i) {
    const double mid = (lo + hi) / 2;
    (kolmogorov_limit_survival(mid) > alpha ? lo : hi) = mid;
  }
  const double rn = static_cast<double>(n);
  return std::min(1.0, hi / (std::sqrt(rn) + 0.12 + 0.11 / std::sqrt(rn)));
}

/// The whole test on finite values in any order.
template <class Cdf>
ks_result ks_test(std::vector<double> values, const Cdf& cdf) {
  if (values.empty()) throw std::invalid_argument("kindling::ks_test: argument 'values' is empty, expected >= 1 value");
  std::sort(values.begin(), values.end());
  return ks_p_value(values.size(), ks_statistic_sorted(values, cdf));
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_KOLMOGOROV_HPP
