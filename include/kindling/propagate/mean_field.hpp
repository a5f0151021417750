// kindling/propagate/mean_field.hpp: the mean-field picture of a deep random network
// (Poole et al., NeurIPS 2016; Schoenholz et al., ICLR 2017).
//
// With i.i.d. zero-mean weights of variance sigma_w^2 / fan_in and biases of variance
// sigma_b^2, a layer's pre-activations are Gaussian in the wide limit, with second
// moment given by the length map
//     q_l = sigma_w^2 E[phi(sqrt(q_{l-1}) z)^2] + sigma_b^2,          z ~ N(0, 1)
// and back-propagated gradients with respect to pre-activations scale per layer by
//     chi = sigma_w^2 E[phi'(sqrt(q) z)^2]
// (Schoenholz et al. 2017, eq. 4 and sec. 3; with unequal widths sigma_w^2 is
// fan_in Var W forward and fan_out Var W backward).  At the fixed point q* of the length
// map, chi is also the slope of the correlation map at c = 1, and
//     xi_c = -1 / ln chi        (correlation depth scale, Schoenholz et al. eq. 9)
//     xi_q = -1 / ln F'(q*)     (length depth scale: how fast q_l reaches q*)
// chi = 1 is the edge of chaos, where xi_c diverges (criticality.hpp solves for it).
#ifndef KINDLING_PROPAGATE_MEAN_FIELD_HPP
#define KINDLING_PROPAGATE_MEAN_FIELD_HPP

#include <cmath>
#include <cstdio>
#include <cstddef>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include "stack.hpp"

namespace kindling {

namespace detail {
inline void require_variance(double v, const char* where, const char* argument) {
  if (!(std::isfinite(v) && v >= 0.0)) {
    throw std::domain_error(std::string(where) + ": argument '" + argument + "' = " +
                            argument_text(v) + ", expected a finite number >= 0");
  }
}
inline double depth_scale(double slope) {
  // -1 / ln(slope); infinite at slope 1 (and for slope > 1, the scale of departure).
  // |ln slope| < 1e-12 is 1 to the quadrature's accuracy (~1e-15 a moment) and counts
  // as infinite: a depth of 1e12 layers means nothing else.
  if (!(slope > 0.0)) return 0.0;
  const double l = std::log(slope);
  if (std::fabs(l) < 1e-12) return std::numeric_limits<double>::infinity();
  return 1.0 / std::fabs(l);
}
}  // namespace detail

/// One step of the length map: sigma_w^2 E[phi(sqrt(q) z)^2] + sigma_b^2.
inline double length_map(const nonlinearity& phi, double q, double sigma_w2, double sigma_b2) {
  constexpr const char* where = "kindling::length_map";
  detail::require_variance(q, where, "q");
  detail::require_variance(sigma_w2, where, "sigma_w2");
  detail::require_variance(sigma_b2, where, "sigma_b2");
  return sigma_w2 * phi.second_moment(q) + sigma_b2;
}

/// The backward factor sigma_w^2 E[phi'(sqrt(q) z)^2].
inline double backward_factor(const nonlinearity& phi, double q, double sigma_w2) {
  constexpr const char* where = "kindling::backward_factor";
  detail::require_variance(q, where, "q");
  detail::require_variance(sigma_w2, where, "sigma_w2");
  return sigma_w2 * phi.slope_second_moment(q);
}

/// Where iterating the length map from q_start leads.
struct fixed_point_result {
  double q = 0;                  // q*, or the last iterate when not converged
  bool converged = false;
  bool diverged = false;         // q grew past 1e300
  std::size_t iterations = 0;
  double chi = 0;                // sigma_w^2 E[phi'(sqrt(q*) z)^2]
  double length_slope = 0;       // F'(q*)
  double correlation_depth = 0;  // xi_c = 1 / |ln chi| (infinite at chi = 1)
  double length_depth = 0;       // xi_q = 1 / |ln F'(q*)|
};

/// Iterates q <- F(q) from q_start until the relative change is below `tolerance`
/// (or q < 1e-300), at most max_iterations times.  Marginal maps (F'(q*) = 1, e.g.
/// tanh at sigma_w^2 = 1, sigma_b^2 = 0, where q_l ~ 1/(2l)) converge only slowly and
/// may end with converged = false: that is the honest answer for a finite depth.
inline fixed_point_result length_fixed_point(const nonlinearity& phi, double sigma_w2,
                                             double sigma_b2, double q_start = 1.0,
                                             double tolerance = 1e-13,
                                             std::size_t max_iterations = 10000) {
  constexpr const char* where = "kindling::length_fixed_point";
  detail::require_variance(sigma_w2, where, "sigma_w2");
  detail::require_variance(sigma_b2, where, "sigma_b2");
  detail::require_variance(q_start, where, "q_start");
  if (!(tolerance > 0.0 && tolerance < 1.0)) {
    throw std::domain_error(std::string(where) + ": argument 'tolerance' = " +
                            detail::argument_text(tolerance) + ", expected a number in (0, 1)");
  }
  fixed_point_result r;
  double q = q_start;
  for (std::size_t i = 0; i < max_iterations; ++i) {
    const double next = sigma_w2 * phi.second_moment(q) + sigma_b2;
    r.iterations = i + 1;
    if (!(next < 1e300)) {
      r.diverged = true;
      q = next;
      break;
    }
    const bool done = std::fabs(next - q) <= tolerance * std::fmax(next, q) || next < 1e-300;
    q = next;
    if (done) {
      r.converged = true;
      break;
    }
  }
  r.q = q;
  if (!r.diverged) {
    r.chi = sigma_w2 * phi.slope_second_moment(q);
    r.length_slope = sigma_w2 * phi.second_moment_slope(q);
    r.correlation_depth = detail::depth_scale(r.chi);
    r.length_depth = detail::depth_scale(r.length_slope);
  } else {
    r.chi = std::numeric_limits<double>::infinity();
    r.length_slope = std::numeric_limits<double>::infinity();
  }
  return r;
}

/// What the mean-field theory predicts for one layer of a stack.
struct layer_prediction {
  std::string label;
  std::uint64_t width = 0;
  double forward_scale = 0;          // fan_in Var W
  double backward_scale = 0;         // fan_out Var W
  double preactivation_variance = 0; // q_l = E[h_l^2]
  double gradient_variance = 0;      // E[(dL/dh_l)^2]
  double forward_ratio = 1;          // q_l / q_1
  double backward_ratio = 1;         // gradient_variance_l / gradient_variance_1
  double chi = 0;                    // gradient factor from layer l+1 down to l (output layer: E[phi'^2])
  std::vector<std::string> warnings;
};

/// Options of the analyses.
struct propagation_options {
  /// Warn when a ratio to the first layer exceeds this factor or falls below its inverse.
  double warn_factor = 10.0;
  /// E[g^2] of the loss gradient with respect to the stack's output a_L.
  double output_gradient_variance = 1.0;
};

namespace detail {
inline void check_options(const propagation_options& o, const char* where) {
  if (!(std::isfinite(o.warn_factor) && o.warn_factor > 1.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.warn_factor' = " +
                            argument_text(o.warn_factor) + ", expected a finite number > 1");
  }
  if (!(std::isfinite(o.output_gradient_variance) && o.output_gradient_variance > 0.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.output_gradient_variance' = " +
                            argument_text(o.output_gradient_variance) + ", expected a finite number > 0");
  }
}

// A ratio for a sentence: three significant digits are all a reader needs.
inline std::string ratio_text(double x) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.3g", x);
  return buffer;
}

inline void add_ratio_warnings(std::vector<layer_prediction>& rows, double factor) {
  for (layer_prediction& r : rows) {
    const auto warn = [&](double ratio, const char* what) {
      if (ratio > factor) {
        r.warnings.push_back(std::string(what) + " grew by a factor of " + ratio_text(ratio) +
                             " since the first layer (limit " + argument_text(factor) + ")");
      } else if (ratio < 1.0 / factor) {
        r.warnings.push_back(std::string(what) + " shrank by a factor of " + ratio_text(1.0 / ratio) +
                             " since the first layer (limit " + argument_text(factor) + ")");
      }
    };
    warn(r.forward_ratio, "pre-activation variance");
    warn(r.backward_ratio, "gradient variance");
  }
}
}  // namespace detail

/// The per-layer mean-field table of a stack: the length map with each layer's own
/// sigma_w^2 = fan_in Var W, then gradients from the top,
///   E[delta_L^2] = E[phi_L'(h_L)^2] E[g^2],
///   E[delta_l^2] = E[phi_l'(h_l)^2] fan_out_{l+1} Var W_{l+1} E[delta_{l+1}^2].
inline std::vector<layer_prediction> predict(const layer_stack& stack,
                                             const propagation_options& options = {}) {
  constexpr const char* where = "kindling::predict";
  stack.require_layers(where);
  detail::check_options(options, where);
  const auto& layers = stack.layers();
  std::vector<layer_prediction> rows(layers.size());
  double a2 = stack.input_second_moment();  // E[a_{l-1}^2]
  std::vector<double> slope2(layers.size());
  for (std::size_t l = 0; l < layers.size(); ++l) {
    const stack_layer& L = layers[l];
    layer_prediction& r = rows[l];
    r.label = L.label;
    r.width = L.width;
    r.forward_scale = L.forward_scale();
    r.backward_scale = L.backward_scale();
    r.preactivation_variance = L.forward_scale() * a2 + L.bias_variance;
    a2 = L.act.second_moment(r.preactivation_variance);
    slope2[l] = L.act.slope_second_moment(r.preactivation_variance);
  }
  double g2 = options.output_gradient_variance;  // E[(dL/da_l)^2]
  for (std::size_t k = layers.size(); k-- > 0;) {
    rows[k].chi = (k + 1 < layers.size() ? layers[k + 1].backward_scale() : 1.0) * slope2[k];
    rows[k].gradient_variance = slope2[k] * g2;
    g2 = layers[k].backward_scale() * rows[k].gradient_variance;
  }
  for (layer_prediction& r : rows) {
    r.forward_ratio = r.preactivation_variance / rows.front().preactivation_variance;
    r.backward_ratio = r.gradient_variance / rows.front().gradient_variance;
  }
  detail::add_ratio_warnings(rows, options.warn_factor);
  return rows;
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_MEAN_FIELD_HPP
