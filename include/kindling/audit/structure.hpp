// kindling/audit/structure.hpp: audits of the structured schemes.
//
//   check_orthogonal: the unit matrix Q (units x incoming, schemes/detail/unit_matrix.hpp)
//     has orthonormal rows or columns times the gain: Q Qᵀ = gain² I when it is wide or
//     square, Qᵀ Q = gain² I when it is tall (orthogonal initialization; Saxe et al.
//     2014, from memory). The tolerance is on max |G - gain² I| / gain².
//   check_sparsity: every unit has exactly k nonzero incoming weights (Martens 2010).
#ifndef KINDLING_AUDIT_STRUCTURE_HPP
#define KINDLING_AUDIT_STRUCTURE_HPP

#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

#include "detail/gather.hpp"
#include "result.hpp"

namespace kindling {

/// Q Qᵀ (or Qᵀ Q) against gain² I, entry by entry.
template <class E>
audit_report check_orthogonal(const strided_view<E>& v, double gain = 1, double tolerance = 1e-5,
                              weight_layout layout = weight_layout::out_in) {
  if (!std::isfinite(gain) || gain == 0) {
    throw std::domain_error("kindling::check_orthogonal: argument 'gain' = " + std::to_string(gain) +
                            ", expected a finite nonzero number");
  }
  if (!std::isfinite(tolerance) || !(tolerance > 0)) {
    throw std::domain_error("kindling::check_orthogonal: argument 'tolerance' = " + std::to_string(tolerance) +
                            ", expected a finite number > 0");
  }
  const detail::gathered g = detail::gather(v, layout);
  detail::require_whole(g, "check_orthogonal");
  audit_report report("orthogonality of " + std::to_string(g.rows) + " units of " + std::to_string(g.cols) +
                      " connections with gain " + detail::short_number(gain, 6));
  if (g.non_finite != 0) {
    report.add({"finite", false, detail::non_finite_sentence(g) + "; orthogonality was not checked"});
    return report;
  }
  report.add({"finite", true, "all values are finite"});
  // Gram matrix of the shorter side: rows when wide or square, columns when tall.
  const bool by_rows = g.rows <= g.cols;
  const std::uint64_t n = by_rows ? g.rows : g.cols, m = by_rows ? g.cols : g.rows;
  const auto at = [&](std::uint64_t a, std::uint64_t k) {
    return by_rows ? g.values[a * g.cols + k] : g.values[k * g.cols + a];
  };
  const double g2 = gain * gain;
  double worst = 0;
  std::uint64_t worst_a = 0, worst_b = 0;
  for (std::uint64_t a = 0; a < n; ++a) {
    for (std::uint64_t b = a; b < n; ++b) {
      double dot = 0;
      for (std::uint64_t k = 0; k < m; ++k) dot += at(a, k) * at(b, k);
      const double err = std::abs(dot - (a == b ? g2 : 0.0)) / g2;
      if (err > worst) {
        worst = err;
        worst_a = a;
        worst_b = b;
      }
    }
  }
  const std::string side = by_rows ? "rows" : "columns";
  const bool ok = worst <= tolerance;
  report.add({"orthogonal", ok,
              ok ? "the " + side + " are orthogonal with norm gain (largest error " + detail::short_number(worst, 3) +
                       " of gain²)"
                 : "the " + side + " are not orthonormal times the gain: entry (" + std::to_string(worst_a) + ", " +
                       std::to_string(worst_b) + ") of the Gram matrix is off by " +
                       detail::short_number(worst, 3) + " of gain² " + detail::short_number(g2, 6) +
                       ", more than the tolerance " + detail::short_number(tolerance, 3),
              worst});
  return report;
}

/// Exactly k nonzero incoming weights in every unit.
template <class E>
audit_report check_sparsity(const strided_view<E>& v, std::uint64_t k, weight_layout layout = weight_layout::out_in) {
  const detail::gathered g = detail::gather(v, layout);
  detail::require_whole(g, "check_sparsity");
  if (k == 0 || k > g.cols) {
    throw std::invalid_argument("kindling::check_sparsity: argument 'k' = " + std::to_string(k) +
                                ", expected 1 to " + std::to_string(g.cols) + " (the incoming weights of a unit)");
  }
  audit_report report("sparsity of " + std::to_string(g.rows) + " units, " + std::to_string(k) + " nonzero each");
  if (g.non_finite != 0) {
    report.add({"finite", false, detail::non_finite_sentence(g) + "; sparsity was not checked"});
    return report;
  }
  report.add({"finite", true, "all values are finite"});
  std::uint64_t wrong = 0, first = 0, first_count = 0;
  for (std::uint64_t r = 0; r < g.rows; ++r) {
    std::uint64_t count = 0;
    for (std::uint64_t j = 0; j < g.cols; ++j) count += g.values[r * g.cols + j] != 0;
    if (count != k) {
      if (wrong == 0) {
        first = r;
        first_count = count;
      }
      ++wrong;
    }
  }
  report.add({"nonzero-per-unit", wrong == 0,
              wrong == 0 ? "every unit has exactly " + std::to_string(k) + " nonzero incoming weights"
                         : std::to_string(wrong) + " of " + std::to_string(g.rows) + " units do not have exactly " +
                               std::to_string(k) + " nonzero incoming weights (unit " + std::to_string(first) +
                               " has " + std::to_string(first_count) + ")",
              static_cast<double>(wrong)});
  return report;
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_STRUCTURE_HPP
