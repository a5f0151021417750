// Gaussian quadrature rules for expectations under a normal distribution.
//
// gauss_hermite_rule(n): the n-point rule for the probabilists' weight
// exp(-x^2/2) / sqrt(2 pi), i.e. sum_i w_i f(x_i) ~ E[f(z)] for z ~ N(0, 1); exact for
// polynomials of degree < 2n.  Its nodes are the zeros of He_n; they are sqrt(2) times
// the physicists' nodes of Abramowitz & Stegun, Table 25.10, whose weights are
// sqrt(pi) times ours.  numpy.polynomial.hermite_e.hermegauss gives the same nodes
// with weights sqrt(2 pi) times ours.
//
// Method (Golub & Welsch, Math. Comp. 23, 1969): the nodes are the eigenvalues of the
// Jacobi matrix of the orthonormal recurrence
//   sqrt(k+1) p_{k+1}(x) = x p_k(x) - sqrt(k) p_{k-1}(x),   p_0 = 1,
// (zero diagonal, off-diagonal sqrt(k)).  We isolate each eigenvalue by bisection on
// the Sturm count of that tridiagonal matrix, polish it by Newton's method on p_n
// (p_n' = sqrt(n) p_{n-1}), and take the Christoffel weight w_i = 1 / (n p_{n-1}(x_i)^2),
// which keeps full relative accuracy even for the tiny outer weights.
//
// gauss_legendre_rule(n): the n-point rule on [-1, 1] (weight 1), used piecewise for
// integrands with a kink, where Gauss-Hermite converges slowly.  Nodes by Newton's
// method on the Legendre recurrence (A&S 22.7.10), weights 2 / ((1 - x^2) P_n'(x)^2)
// (A&S 25.4.29).
#ifndef KINDLING_DETAIL_GAUSS_HERMITE_HPP
#define KINDLING_DETAIL_GAUSS_HERMITE_HPP

#include <cmath>
#include <cstddef>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

namespace kindling::detail {

struct quadrature_rule {
  std::vector<double> nodes;    // ascending
  std::vector<double> weights;  // positive
};

inline constexpr std::size_t max_quadrature_nodes = 200;

inline void check_node_count(std::size_t n, const char* where) {
  if (n == 0 || n > max_quadrature_nodes) {
    throw std::invalid_argument(std::string(where) + ": argument 'nodes' = " + std::to_string(n) +
                                ", expected 1 to " + std::to_string(max_quadrature_nodes));
  }
}

// Orthonormal probabilists' Hermite values p_{n-1}(x) and p_n(x).
inline void hermite_orthonormal(std::size_t n, double x, double& p_prev, double& p_n) {
  double a = 0.0;  // p_{k-1}
  double b = 1.0;  // p_k
  for (std::size_t k = 0; k < n; ++k) {
    const double kd = static_cast<double>(k);
    const double next = (x * b - std::sqrt(kd) * a) / std::sqrt(kd + 1.0);
    a = b;
    b = next;
  }
  p_prev = a;
  p_n = b;
}

// Number of eigenvalues below x of the n x n Jacobi matrix with zero diagonal and
// off-diagonal sqrt(1), ..., sqrt(n-1): the count of negative pivots of T - x I.
inline std::size_t hermite_sturm_count(std::size_t n, double x) {
  std::size_t count = 0;
  double q = -x;
  const double tiny = std::numeric_limits<double>::min();
  for (std::size_t k = 0;; ++k) {
    if (q == 0.0) q = -tiny;  // perturb an exact zero pivot, as bisection allows
    if (q < 0.0) ++count;
    if (k + 1 == n) break;
    q = -x - static_cast<double>(k + 1) / q;  // e_k^2 = k + 1
  }
  return count;
}

inline quadrature_rule gauss_hermite_rule(std::size_t n) {
  check_node_count(n, "kindling::detail::gauss_hermite_rule");
  quadrature_rule rule;
  rule.nodes.assign(n, 0.0);
  rule.weights.assign(n, 0.0);
  // Gershgorin: every eigenvalue lies in |x| <= 2 sqrt(n - 1) (+ a margin).
  const double bound = 2.0 * std::sqrt(static_cast<double>(n)) + 1.0;
  const std::size_t half = n / 2;  // nodes are symmetric: compute the upper ones
  for (std::size_t j = n - half; j < n; ++j) {
    // eigenvalue j (0-based, ascending): the smallest x with count(x) > j.
    double lo = 0.0;
    double hi = bound;
    for (int it = 0; it < 200; ++it) {
      const double mid = 0.5 * (lo + hi);
      if (mid <= lo || mid >= hi) break;
      if (hermite_sturm_count(n, mid) > j) {
        hi = mid;
      } else {
        lo = mid;
      }
    }
    double x = 0.5 * (lo + hi);
    for (int it = 0; it < 3; ++it) {
      double p_prev = 0.0;
      double p_n = 0.0;
      hermite_orthonormal(n, x, p_prev, p_n);
      const double step = p_n / (std::sqrt(static_cast<double>(n)) * p_prev);
      const double next = x - step;
      if (!(next > lo - 1e-12 && next < hi + 1e-12)) break;  // stay in the bracket
      x = next;
    }
    rule.nodes[j] = x;
    rule.nodes[n - 1 - j] = -x;
  }
  if (n % 2 == 1) rule.nodes[n / 2] = 0.0;
  for (std::size_t i = 0; i < n; ++i) {
    double p_prev = 0.0;
    double p_n = 0.0;
    hermite_orthonormal(n, rule.nodes[i], p_prev, p_n);
    rule.weights[i] = 1.0 / (static_cast<double>(n) * p_prev * p_prev);
  }
  return rule;
}

// Legendre P_{n-1}(x) and P_n(x) by (k+1) P_{k+1} = (2k+1) x P_k - k P_{k-1}.
inline void legendre_values(std::size_t n, double x, double& p_prev, double& p_n) {
  double a = 0.0;
  double b = 1.0;
  for (std::size_t k = 0; k < n; ++k) {
    const double kd = static_cast<double>(k);
    const double next = ((2.0 * kd + 1.0) * x * b - kd * a) / (kd + 1.0);
    a = b;
    b = next;
  }
  p_prev = a;
  p_n = b;
}

inline quadrature_rule gauss_legendre_rule(std::size_t n) {
  check_node_count(n, "kindling::detail::gauss_legendre_rule");
  quadrature_rule rule;
  rule.nodes.assign(n, 0.0);
  rule.weights.assign(n, 0.0);
  const double pi = 3.14159265358979323846;
  const double nd = static_cast<double>(n);
  for (std::size_t i = 0; i < (n + 1) / 2; ++i) {
    // Initial guess near the i-th largest zero (A&S 22.16.6 asymptotics).
    double x = std::cos(pi * (static_cast<double>(i) + 0.75) / (nd + 0.5));
    double derivative = 1.0;
    for (int it = 0; it < 100; ++it) {
      double p_prev = 0.0;
      double p_n = 0.0;
      legendre_values(n, x, p_prev, p_n);
      derivative = nd * (x * p_n - p_prev) / (x * x - 1.0);
      const double step = p_n / derivative;
      x -= step;
      if (std::fabs(step) <= 1e-16) break;
    }
    double p_prev = 0.0;
    double p_n = 0.0;
    legendre_values(n, x, p_prev, p_n);
    derivative = nd * (x * p_n - p_prev) / (x * x - 1.0);
    const double w = 2.0 / ((1.0 - x * x) * derivative * derivative);
    rule.nodes[n - 1 - i] = x;
    rule.nodes[i] = -x;
    rule.weights[n - 1 - i] = w;
    rule.weights[i] = w;
  }
  if (n % 2 == 1) rule.nodes[n / 2] = 0.0;
  return rule;
}

}  // namespace kindling::detail

#endif  // KINDLING_DETAIL_GAUSS_HERMITE_HPP
