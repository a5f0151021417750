// kindling/audit/structure.hpp: audits of the structured schemes.
//
//   check_orthogonal: the unit matrix Q (units x incoming, schemes/detail/unit_matrix.hpp)
//     has orthonormal rows or columns times the gain: Q Qᵀ = gain² I when it is wide or
//     square, Qᵀ Q = gain² I when it is tall (orthogonal initialization; Saxe et al.
//     2014, from memory). The tolerance is on max |G - gain² I| / gain².
//   check_delta_orthogonal: a convolution kernel is zero at every tap but the centre,
//     and each group's centre-tap block (out/groups x in) is orthogonal times the gain
//     as above (delta-orthogonal initialization; Xiao et al., ICML 2018, from memory).
//   check_orthogonal of a packed layer (packed_dense): the same for each gate block.
//   check_sparsity: every unit has exactly k nonzero incoming weights (Martens 2010).
#ifndef KINDLING_AUDIT_STRUCTURE_HPP
#define KINDLING_AUDIT_STRUCTURE_HPP

#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "../schemes/detail/centre_tap.hpp"
#include "detail/centre_split.hpp"
#include "detail/gather.hpp"
#include "result.hpp"

namespace kindling {

namespace detail {

inline void check_gain_and_tolerance(const char* where, double gain, double tolerance) {
  if (!std::isfinite(gain) || gain == 0) {
    throw std::domain_error(std::string("kindling::") + where + ": argument 'gain' = " + std::to_string(gain) +
                            ", expected a finite nonzero number");
  }
  if (!std::isfinite(tolerance) || !(tolerance > 0)) {
    throw std::domain_error(std::string("kindling::") + where + ": argument 'tolerance' = " +
                            std::to_string(tolerance) + ", expected a finite number > 0");
  }
}

// The worst entry of the Gram matrix of the shorter side of a rows x cols matrix
// (at(r, c)) against gain² I, relative to gain².
struct gram_error {
  double worst = 0;
  std::uint64_t a = 0, b = 0;
  bool by_rows = true;
};
template <class At>
gram_error worst_gram_error(std::uint64_t rows, std::uint64_t cols, const At& at, double gain) {
  gram_error e;
  e.by_rows = rows <= cols;
  const std::uint64_t n = e.by_rows ? rows : cols, m = e.by_rows ? cols : rows;
  const auto side = [&](std::uint64_t x, std::uint64_t k) { return e.by_rows ? at(x, k) : at(k, x); };
  const double g2 = gain * gain;
  for (std::uint64_t a = 0; a < n; ++a) {
    for (std::uint64_t b = a; b < n; ++b) {
      double dot = 0;
      for (std::uint64_t k = 0; k < m; ++k) dot += side(a, k) * side(b, k);
      const double err = std::abs(dot - (a == b ? g2 : 0.0)) / g2;
      if (err > e.worst) {
        e.worst = err;
        e.a = a;
        e.b = b;
      }
    }
  }
  return e;
}

inline audit_finding orthogonal_finding(const char* name, const std::string& what, const gram_error& e, double gain,
                                  double tolerance) {
  const std::string side = (what.empty() ? "" : what + " ") + (e.by_rows ? "rows" : "columns");
  const bool ok = e.worst <= tolerance;
  return {name, ok,
          ok ? "the " + side + " are orthogonal with norm gain (largest error " + short_number(e.worst, 3) +
                   " of gain²)"
             : "the " + side + " are not orthonormal times the gain: entry (" + std::to_string(e.a) + ", " +
                   std::to_string(e.b) + ") of the Gram matrix is off by " + short_number(e.worst, 3) +
                   " of gain² " + short_number(gain * gain, 6) + ", more than the tolerance " +
                   short_number(tolerance, 3),
          e.worst};
}

}  // namespace detail

/// Q Qᵀ (or Qᵀ Q) against gain² I, entry by entry.
template <class E>
audit_report check_orthogonal(const strided_view<E>& v, double gain = 1, double tolerance = 1e-5,
                              weight_layout layout = weight_layout::out_in) {
  detail::check_gain_and_tolerance("check_orthogonal", gain, tolerance);
  const detail::gathered g = detail::gather(v, layout);
  detail::require_whole(g, "check_orthogonal");
  audit_report report("orthogonality of " + std::to_string(g.rows) + " units of " + std::to_string(g.cols) +
                      " connections with gain " + detail::short_number(gain, 6));
  if (g.non_finite != 0) {
    report.add({"finite", false, detail::non_finite_sentence(g) + "; orthogonality was not checked"});
    return report;
  }
  report.add({"finite", true, "all values are finite"});
  const auto at = [&](std::uint64_t r, std::uint64_t c) { return g.values[r * g.cols + c]; };
  report.add(detail::orthogonal_finding("orthogonal", "", detail::worst_gram_error(g.rows, g.cols, at, gain), gain,
                                        tolerance));
  return report;
}

/// check_orthogonal of a packed weight (packed_dense: LSTM or GRU gates, fused
/// projections), block by block: initialize() makes each gate block orthogonal on its
/// own, so the stacked matrix as a whole is not (its Gram matrix has gain² k on the
/// diagonal for k blocks, or off-diagonal terms between blocks). The layout is the
/// layer's; each finding says which block, and the report passes if every block does.
template <class E, class Layer, std::enable_if_t<detail::is_packed<Layer>::value, int> = 0>
audit_report check_orthogonal(const strided_view<E>& v, const Layer& layer, double gain = 1,
                              double tolerance = 1e-5) {
  detail::check_gain_and_tolerance("check_orthogonal", gain, tolerance);
  const weight_layout layout = weight_info_of(layer, v.global_shape()).layout;
  if (!v.is_whole()) {
    throw std::invalid_argument("kindling::check_orthogonal: argument 'view' holds only the region " +
                                v.part().text() + " of the packed weight " + v.global_shape().text() +
                                "; expected the whole weight");
  }
  const std::vector<packed_block> blocks = layer.all_blocks();
  audit_report report("orthogonality of each of " + std::to_string(blocks.size()) + " packed blocks with gain " +
                      detail::short_number(gain, 6));
  for (const packed_block& b : blocks) {
    strided_view<E> part = v;
    packed_block_view(v, b, &part);
    const audit_report one = check_orthogonal(part, gain, tolerance, layout);
    for (audit_finding f : one.findings()) {
      f.sentence = "block " + std::to_string(b.index) + ": " + f.sentence;
      report.add(f);
    }
  }
  return report;
}

/// A delta-orthogonal convolution kernel: exactly zero at every tap but the centre
/// (floor(k/2) in each spatial axis), and each group's centre block orthogonal times the
/// gain. w gives the fans (for the groups) and the layout, as for initialize().
template <class E>
audit_report check_delta_orthogonal(const strided_view<E>& v, const weight_info& w, double gain = 1,
                                    double tolerance = 1e-5) {
  detail::check_gain_and_tolerance("check_delta_orthogonal", gain, tolerance);
  const detail::centre_tap_geometry geo =
      detail::centre_tap_geometry::of(v.global_shape(), w, "check_delta_orthogonal");
  const detail::gathered g = detail::gather(v, w.layout);
  detail::require_whole(g, "check_delta_orthogonal");
  audit_report report("delta-orthogonality of " + std::to_string(geo.out) + " output channels, " +
                      std::to_string(geo.in) + " input channels a group, " + std::to_string(geo.taps) +
                      " taps, " + std::to_string(geo.groups) + " group(s), gain " + detail::short_number(gain, 6));
  if (g.non_finite != 0) {
    report.add({"finite", false, detail::non_finite_sentence(g) + "; delta-orthogonality was not checked"});
    return report;
  }
  report.add({"finite", true, "all values are finite"});
  const detail::centre_taps split = detail::split_centre_taps(g, geo, v.global_shape(), w.layout, false);
  const std::uint64_t off_centre = split.off_centre;
  report.add({"zero-off-centre", off_centre == 0,
              off_centre == 0
                  ? "every tap but the centre (" + std::to_string(geo.centre) + ") is exactly zero"
                  : std::to_string(off_centre) + " values at taps other than the centre are nonzero (the first: " +
                        detail::short_number(split.first_value, 6) + " at output " + std::to_string(split.first_out) +
                        ", input " + std::to_string(split.first_in) + ", tap " + std::to_string(split.first_tap) +
                        "; the centre is tap " +
                        std::to_string(geo.centre) + ")",
              static_cast<double>(off_centre)});
  // Each group's block: rows o of that group, columns the group's in channels.
  const std::uint64_t per = geo.out_per_group();
  detail::gram_error worst;
  std::uint64_t worst_group = 0;
  for (std::uint64_t k = 0; k < geo.groups; ++k) {
    const double* block = split.centre.data() + k * per * geo.in;
    const auto at = [&](std::uint64_t r, std::uint64_t c) { return block[r * geo.in + c]; };
    const detail::gram_error e = detail::worst_gram_error(per, geo.in, at, gain);
    if (k == 0 || e.worst > worst.worst) {
      worst = e;
      worst_group = k;
    }
  }
  const std::string what = geo.groups == 1 ? "centre-tap" : "group " + std::to_string(worst_group) + " centre-tap";
  report.add(detail::orthogonal_finding("orthogonal-centre", what, worst, gain, tolerance));
  return report;
}

/// check_delta_orthogonal of a layer's weight (its fans and layout).
template <class E, class Layer, class = decltype(std::declval<const Layer&>().layer_fans())>
audit_report check_delta_orthogonal(const strided_view<E>& v, const Layer& layer, double gain = 1,
                                    double tolerance = 1e-5) {
  return check_delta_orthogonal(v, weight_info_of(layer, v.global_shape()), gain, tolerance);
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
