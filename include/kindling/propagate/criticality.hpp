// kindling/propagate/criticality.hpp: the edge of chaos.  For an activation and a bias
// variance sigma_b^2, the weight variance sigma_w^2 at which the backward factor at the
// length map's fixed point is one,
//     q* = sigma_w^2 E[phi(sqrt(q*) z)^2] + sigma_b^2,   chi = sigma_w^2 E[phi'(sqrt(q*) z)^2] = 1
// (Poole et al., NeurIPS 2016; Schoenholz et al., ICLR 2017, the critical line of their
// phase diagrams).  Known points: ReLU sigma_w^2 = 2 at sigma_b^2 = 0 (He et al. 2015);
// tanh sigma_w^2 = 1 at sigma_b^2 = 0 with q* = 0.
//
// Method: along the curve of fixed points, q* is the free variable:
//     sigma_w^2(q) = (q - sigma_b^2) / E[phi(sqrt(q) z)^2],   q > sigma_b^2,
// so chi(q) = sigma_w^2(q) E[phi'(sqrt(q) z)^2] is a function of q alone.  We scan q on a
// log grid (8 points a decade from 1e-8 to 1e8 above sigma_b^2), take the first sign
// change of chi(q) - 1 and bisect it to the last bit.  With sigma_b^2 = 0 and phi(0) = 0,
// q* = 0 is the fixed point and sigma_w^2 is the q -> 0 limit q / E[phi(sqrt(q) z)^2].
#ifndef KINDLING_PROPAGATE_CRITICALITY_HPP
#define KINDLING_PROPAGATE_CRITICALITY_HPP

#include <cmath>
#include <limits>
#include <string>

#include "mean_field.hpp"

namespace kindling {

struct critical_point {
  bool exists = false;
  double bias_variance = 0;      // sigma_b^2 (given)
  double weight_variance = 0;    // sigma_w^2 = fan_in Var W at the edge of chaos
  double fixed_point = 0;        // q*
  double chi = 0;                // at (sigma_w^2, q*): 1 up to rounding
  double length_slope = 0;       // F'(q*)
  double length_depth = 0;       // xi_q = 1 / |ln F'(q*)|
  double correlation_depth = 0;  // xi_c = 1 / |ln chi|: infinite at criticality
  std::string note;              // why none exists, or how it was found
};

namespace detail {
struct critical_curve {
  const nonlinearity& phi;
  double sb2;
  double weight_variance(double q) const { return (q - sb2) / phi.second_moment(q); }
  double chi(double q) const { return weight_variance(q) * phi.slope_second_moment(q); }
};

inline critical_point finish_critical(const nonlinearity& phi, double sb2, double sw2, double q,
                                      std::string note) {
  critical_point c;
  c.exists = true;
  c.bias_variance = sb2;
  c.weight_variance = sw2;
  c.fixed_point = q;
  const double qe = q > 0.0 ? q : 1e-12;
  c.chi = sw2 * phi.slope_second_moment(qe);
  c.length_slope = sw2 * phi.second_moment_slope(q);
  c.length_depth = depth_scale(c.length_slope);
  c.correlation_depth = depth_scale(c.chi);
  c.note = std::move(note);
  return c;
}
}  // namespace detail

/// The critical weight variance for `phi` at bias variance `sigma_b2` (see above).
/// When none exists (ReLU with sigma_b^2 > 0: chi = 1 - sigma_b^2/q* < 1 for every q*),
/// exists = false and `note` says why.
inline critical_point find_critical_point(const nonlinearity& phi, double sigma_b2) {
  constexpr const char* where = "kindling::find_critical_point";
  detail::require_variance(sigma_b2, where, "sigma_b2");
  const detail::critical_curve curve{phi, sigma_b2};
  if (sigma_b2 == 0.0 && phi(0.0) == 0.0) {
    constexpr double q0 = 1e-12;  // E[phi(sqrt(q) z)^2] / q is q-independent to O(q)
    return detail::finish_critical(phi, sigma_b2, curve.weight_variance(q0), 0.0,
                                   "q* = 0: sigma_b^2 = 0 and phi(0) = 0, limit q -> 0");
  }
  const double base = std::fmax(sigma_b2, 1.0);
  double lo = 0, f_lo = 0;
  bool have = false;
  for (int k = -64; k <= 64; ++k) {
    const double q = sigma_b2 + base * std::pow(10.0, static_cast<double>(k) / 8.0);
    const double f = curve.chi(q) - 1.0;
    if (have && ((f_lo < 0.0) != (f < 0.0))) {
      double a = lo, b = q, fa = f_lo;
      for (int i = 0; i < 200 && b - a > 4 * std::numeric_limits<double>::epsilon() * b; ++i) {
        const double m = 0.5 * (a + b);
        const double fm = curve.chi(m) - 1.0;
        if ((fm < 0.0) == (fa < 0.0)) {
          a = m;
          fa = fm;
        } else {
          b = m;
        }
      }
      const double qs = 0.5 * (a + b);
      return detail::finish_critical(phi, sigma_b2, curve.weight_variance(qs), qs,
                                     "bisection of chi(q*) = 1 along the fixed-point curve");
    }
    lo = q;
    f_lo = f;
    have = true;
  }
  critical_point none;
  none.bias_variance = sigma_b2;
  none.note = "chi(q*) - 1 does not change sign for q* in sigma_b^2 + [1e-8, 1e8] * " +
              detail::argument_text(base) + " (chi - 1 = " + detail::argument_text(f_lo) +
              " at the top): no edge of chaos for activation '" + phi.name() +
              "' at sigma_b^2 = " + detail::argument_text(sigma_b2);
  return none;
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_CRITICALITY_HPP
