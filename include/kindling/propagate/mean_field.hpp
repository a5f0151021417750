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

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstddef>
#include <limits>
#include <map>
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
inline double mean_of(const std::vector<double>& v) {
  double sum = 0.0;
  for (double x : v) sum += x;
  return sum / static_cast<double>(v.size());
}
// phi's moment at each position's q; positions share few distinct q (interior ones all
// the same), so each distinct q is integrated once.
template <class Moment>
std::vector<double> moments_at(const std::vector<double>& q, const Moment& moment) {
  std::map<double, double> seen;
  std::vector<double> out(q.size());
  for (std::size_t p = 0; p < q.size(); ++p) {
    auto it = seen.find(q[p]);
    if (it == seen.end()) it = seen.emplace(q[p], moment(q[p])).first;
    out[p] = it->second;
  }
  return out;
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
  kindling::fans fans;               // of W_l (a residual sum: its projection's, or the skip's)
  std::string activation;            // phi_l's name
  std::string scheme;                // as the stack names it
  double weight_variance = 0;        // Var W_l per element
  double forward_scale = 0;          // fan_in Var W
  double backward_scale = 0;         // fan_out Var W
  double preactivation_variance = 0; // q_l = E[h_l^2]
  double gradient_variance = 0;      // E[(dL/dh_l)^2]
  double activation_moment = 0;      // E[a_l^2] = E[phi_l(h_l)^2], per unit: what layer l passes on
  double forward_factor = 1;         // E[a_l^2] / E[a_{l-1}^2] per unit (a_0 = the input)
  double chi = 0;                    // E[(dL/dh_l)^2] / E[(dL/dh_{l+1})^2] per unit (output layer: / E[g^2])
  std::vector<std::string> warnings;
};

/// Options of the analyses.
struct propagation_options {
  /// Warn when the predicted signal or gradient changes by more than this factor over a
  /// run of consecutive layers, both per unit and per layer (summed over its units).
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

// A run of a pass, between two of its points i < j (in the order the pass runs), over
// which the second moment changes by more than the limit both per unit and per layer.
struct drift_window {
  std::size_t from = 0, to = 0;
  bool grows = false;
  double per_unit = 1, per_layer = 1;  // later / earlier
};

// The change from point i to point j that counts: the smaller of the per-unit and the
// per-layer change, signed (> 0 grows, < 0 falls), 0 when they disagree in sign.  A
// point whose moment is 0 cannot start a run (nothing to compare with); one reaching 0
// from a positive value falls by an infinite factor.
inline double drift_amount(const std::vector<double>& unit, const std::vector<double>& layer, std::size_t i,
                           std::size_t j) {
  if (!(unit[i] > 0.0 && layer[i] > 0.0)) return 0.0;
  const double u = std::log(unit[j] / unit[i]), v = std::log(layer[j] / layer[i]);
  if (u > 0.0 && v > 0.0) return std::fmin(u, v);
  if (u < 0.0 && v < 0.0) return std::fmax(u, v);
  return 0.0;
}

// Disjoint windows beyond log(limit), largest first, then on each side (greedy).  A
// window joins two points of the same part (part[i] == part[j]): both on the residual
// stream, or both inside one branch.  A branch's moments differ from the stream's by
// its scale by design (a normalizer-free alpha = 0.2 or Fixup's factors make its
// gradients 25x smaller or more), which is not drift with depth.
inline void find_drifts(const std::vector<double>& unit, const std::vector<double>& layer,
                        const std::vector<std::size_t>& part, std::size_t lo, std::size_t hi, double log_limit,
                        std::vector<drift_window>& out) {
  if (hi <= lo) return;
  double best = 0.0;
  std::size_t bi = 0, bj = 0;
  for (std::size_t i = lo; i < hi; ++i) {
    for (std::size_t j = i + 1; j <= hi; ++j) {
      if (part[i] != part[j]) continue;
      const double d = drift_amount(unit, layer, i, j);
      if (std::fabs(d) > std::fabs(best) * (1.0 + 1e-9)) {  // ties: the earliest start, then the shortest run
        best = d;
        bi = i;
        bj = j;
      }
    }
  }
  if (!(std::fabs(best) > log_limit)) return;
  drift_window w;
  w.from = bi;
  w.to = bj;
  w.grows = best > 0.0;
  w.per_unit = unit[bj] / unit[bi];
  w.per_layer = layer[bj] / layer[bi];
  out.push_back(w);
  find_drifts(unit, layer, part, lo, bi, log_limit, out);
  find_drifts(unit, layer, part, bj, hi, log_limit, out);
}

inline std::string drift_sentence(const char* pass, const char* what, const drift_window& w,
                                  const std::string& from, const std::string& to, double limit) {
  const double u = w.grows ? w.per_unit : 1.0 / w.per_unit;
  const double v = w.grows ? w.per_layer : 1.0 / w.per_layer;
  const std::size_t steps = w.to - w.from;
  std::string s = std::string(pass) + ": " + what + (w.grows ? " grows" : " falls") + " by a factor of " +
                  ratio_text(u);
  s += ratio_text(u) == ratio_text(v) ? " per unit and per layer alike"
                                      : " per unit and " + ratio_text(v) + " per layer (summed over its units)";
  s += " from " + from + " " + to;
  if (steps > 1 && std::isfinite(u)) {
    s += " (x" + ratio_text(std::pow(w.per_unit, 1.0 / static_cast<double>(steps))) + " a layer)";
  }
  if (steps > 1) s += std::string(": it ") + (w.grows ? "explodes" : "vanishes") + " with depth";
  s += " (limit " + argument_text(limit) + ")";
  return s;
}
}  // namespace detail

/// The per-layer mean-field table of a stack: the length map with each layer's own
/// sigma_w^2 = fan_in Var W, then gradients from the top,
///   E[delta_L^2] = E[phi_L'(h_L)^2] E[g^2],
///   E[delta_l^2] = E[phi_l'(h_l)^2] fan_out_{l+1} Var W_{l+1} E[delta_{l+1}^2].
///
/// Warnings are about predicted drift only, along the path each pass takes:
///   forward:  E[a^2] of the input x, then of each layer's output a_l (what the next
///             layer's weights see), from the input up;
///   backward: E[g^2] of the loss gradient at the output, then E[delta_l^2] of each
///             layer's pre-activation gradient (what its weight gradient is made of,
///             dL/dW_l = delta_l a_{l-1}^T), from the output down.
/// Convolutions placed on a feature map (layer_stack::feature_maps) are followed position
/// by position: output position p of a convolution with Var W per weight gets
///   q_l(p) = Var W (in / groups) sum_{taps t in the input} E[a_{l-1}^2](source(p, t)) + sigma_b^2,
/// the dense rule with the fan-in counted over the taps that fall inside the input (He et
/// al., ICCV 2015, sec. 2.2: a convolution is a dense layer of fan-in k^2 c; Xiao et al.,
/// ICML 2018: the mean-field variance of a convolution averages the layer below over the
/// filter window, from memory).  Interior positions get fan_in Var W E[a^2] + sigma_b^2;
/// border positions that read padding get less, and the layer's row is the mean over its
/// positions, which is what the measured pass averages.  Backward, an input position gets
///   E[(dL/da)^2](s) = Var W (out / groups) sum_{(p, t) reading s} E[delta_l^2](p),
/// so the positions a stride skips or a border cuts get less than fan_out Var W.  A
/// dense layer on a map reads its flattened features: fan_in = channels x positions,
/// the mean of E[a^2] over them.  Every step is exact in the limit of many channels.
/// A run of consecutive steps -- the input -> layer-1 step and the loss -> layer-L step
/// included -- is warned about when its second moment changes by more than warn_factor
/// both per unit and per layer (the per-unit value times the layer's width).  The two
/// differ by the ratio of the widths at the ends of the run, so a change of width alone
/// never triggers a warning: with fan-in scaling the theory keeps the forward signal per
/// unit and the backward gradient per layer (He et al. 2015, sec. 2.2: the backward
/// factors multiply to a ratio of widths, not an exponential), with fan-out scaling the
/// other way round.  What is left is the exponential drift of the ordered or chaotic
/// phase (chi != 1; Schoenholz et al. 2017), e.g. Glorot on ReLU, x1/2 a layer from the
/// input on (He et al. 2015, eq. 10 with n Var W = 1).  The warning goes to the layer
/// where the run starts in the pass's direction (forward: its lowest layer; backward:
/// its highest) and names both ends.
inline std::vector<layer_prediction> predict(const layer_stack& stack,
                                             const propagation_options& options = {}) {
  constexpr const char* where = "kindling::predict";
  stack.require_layers(where);
  detail::check_options(options, where);
  const auto& layers = stack.layers();
  const std::size_t n = layers.size();
  std::vector<layer_prediction> rows(n);
  // E[a_{l-1}^2] per position of the layer below (one entry for a dense layer).
  std::vector<double> a2_map(stack.input_positions(), stack.input_second_moment());
  // E[a^2] maps of the input (0) and every layer's output (l + 1), for residual skips.
  std::vector<std::vector<double>> a2_out{a2_map};
  double a2 = stack.input_second_moment();  // its mean
  std::vector<std::vector<double>> slope2(n);
  std::vector<double> fwd_unit(n + 1), fwd_layer(n + 1);
  fwd_unit[0] = a2;
  fwd_layer[0] = a2 * static_cast<double>(stack.input_units());
  for (std::size_t l = 0; l < n; ++l) {
    const stack_layer& L = layers[l];
    layer_prediction& r = rows[l];
    r.label = L.label;
    r.width = L.width;
    r.fans = L.fans;
    r.activation = std::string(L.act.name());
    r.scheme = L.scheme;
    r.weight_variance = L.weight_variance;
    r.forward_scale = L.forward_scale();
    r.backward_scale = L.backward_scale();
    std::vector<double> q;
    if (L.residual) {
      // x + s branch(x): the branch's last weights are zero-mean and independent of x, so
      // the cross term vanishes and E[h^2] = E[skip(x)^2] + s^2 E[branch(x)^2] (Hanin &
      // Rolnick, NeurIPS 2018; Zhang et al., ICLR 2019, sec. 2)
      const std::vector<double>& x = a2_out[L.skip_from];
      const double s2 = L.branch_scale * L.branch_scale;
      q.resize(a2_map.size());
      for (std::size_t p = 0; p < q.size(); ++p) {
        q[p] = (L.projected ? L.forward_scale() * detail::mean_of(x) : x[p]) + s2 * a2_map[p];
      }
    } else if (L.map) {
      const convolution_map& m = *L.map;
      const double scale = L.weight_variance * static_cast<double>(m.in_channels() / m.groups());
      q.assign(m.out_positions(), 0.0);
      for (std::uint64_t p = 0; p < m.out_positions(); ++p) {
        double sum = 0.0;
        for (std::uint64_t t = 0; t < m.taps(); ++t) {
          const std::int64_t src = m.source(p, t);
          if (src >= 0) sum += a2_map[static_cast<std::size_t>(src)];
        }
        q[p] = scale * sum + L.bias_variance;
      }
    } else {
      q.assign(1, L.forward_scale() * a2 + L.bias_variance);
    }
    r.preactivation_variance = detail::mean_of(q);
    a2_map = detail::moments_at(q, [&L](double v) { return L.act.second_moment(v); });
    a2_out.push_back(a2_map);
    slope2[l] = detail::moments_at(q, [&L](double v) { return L.act.slope_second_moment(v); });
    r.activation_moment = detail::mean_of(a2_map);
    r.forward_factor = a2 > 0.0 ? r.activation_moment / a2
                                : (r.activation_moment > 0.0 ? std::numeric_limits<double>::infinity() : 1.0);
    a2 = r.activation_moment;
    fwd_unit[l + 1] = a2;
    fwd_layer[l + 1] = a2 * static_cast<double>(L.units());
  }
  // E[(dL/da_l)^2] per position of the layer's output, from the loss gradient down.
  std::vector<double> g2_map(layers.back().positions(), options.output_gradient_variance);
  // Points of the backward pass: p = 0 the loss gradient g at the output, p >= 1 delta of
  // layer index n - p (0-based), i.e. from the top layer down.
  std::vector<double> bwd_unit(n + 1), bwd_layer(n + 1);
  bwd_unit[0] = options.output_gradient_variance;
  bwd_layer[0] = options.output_gradient_variance * static_cast<double>(layers.back().units());
  // Gradients a residual sum sends back along its skip, waiting for the layer whose
  // output was the block's input (index as a2_out).
  std::vector<std::vector<double>> skipped(n + 1);
  for (std::size_t k = n; k-- > 0;) {
    const stack_layer& L = layers[k];
    if (!skipped[k + 1].empty()) {
      for (std::size_t p = 0; p < g2_map.size(); ++p) g2_map[p] += skipped[k + 1][p];
    }
    std::vector<double> delta(g2_map.size());
    for (std::size_t p = 0; p < delta.size(); ++p) delta[p] = slope2[k][p] * g2_map[p];
    const double above = k + 1 == n ? 1.0
                         : layers[k + 1].residual ? layers[k + 1].branch_scale * layers[k + 1].branch_scale
                                                  : layers[k + 1].backward_scale();
    rows[k].chi = above * detail::mean_of(slope2[k]);
    rows[k].gradient_variance = detail::mean_of(delta);
    const std::uint64_t below = k > 0 ? layers[k - 1].positions() : stack.input_positions();
    if (L.residual) {
      // back through the sum: s^2 of it to the branch, the rest along the skip
      std::vector<double>& skip = skipped[L.skip_from];
      const std::size_t skip_positions = L.skip_from > 0 ? layers[L.skip_from - 1].positions() : stack.input_positions();
      if (skip.empty()) skip.assign(skip_positions, 0.0);
      for (std::size_t p = 0; p < skip.size(); ++p) {
        skip[p] += L.projected ? L.backward_scale() * rows[k].gradient_variance : delta[p];
      }
      const double s2 = L.branch_scale * L.branch_scale;
      g2_map = delta;
      for (double& g : g2_map) g *= s2;
    } else if (L.map) {
      const convolution_map& m = *L.map;
      const double scale = L.weight_variance * static_cast<double>(m.out_channels() / m.groups());
      g2_map.assign(m.in_positions(), 0.0);
      for (std::uint64_t p = 0; p < m.out_positions(); ++p) {
        for (std::uint64_t t = 0; t < m.taps(); ++t) {
          const std::int64_t src = m.source(p, t);
          if (src >= 0) g2_map[static_cast<std::size_t>(src)] += scale * delta[p];
        }
      }
    } else {
      g2_map.assign(below, L.backward_scale() * rows[k].gradient_variance);
    }
    bwd_unit[n - k] = rows[k].gradient_variance;
    bwd_layer[n - k] = rows[k].gradient_variance * static_cast<double>(L.units());
  }

  // The part of each layer: 0 on the stream, else 1 + the index of the residual sum
  // whose branch holds it (the innermost one: outer sums come later, so are seen first).
  std::vector<std::size_t> part_of(n, 0);
  for (std::size_t j = n; j-- > 0;) {
    if (!layers[j].residual) continue;
    for (std::size_t k = layers[j].skip_from; k < j; ++k) part_of[k] = j + 1;
  }
  // Points of the passes: forward point l + 1 is layer l's output, backward point p >= 1
  // layer n - p's delta; point 0 (the input, the loss gradient) is on the stream.
  std::vector<std::size_t> fwd_part(n + 1, 0), bwd_part(n + 1, 0);
  for (std::size_t l = 0; l < n; ++l) {
    fwd_part[l + 1] = part_of[l];
    bwd_part[n - l] = part_of[l];
  }
  const double log_limit = std::log(options.warn_factor);
  std::vector<detail::drift_window> found;
  detail::find_drifts(fwd_unit, fwd_layer, fwd_part, 0, n, log_limit, found);
  std::sort(found.begin(), found.end(), [](const auto& a, const auto& b) { return a.from < b.from; });
  const auto layer_name = [&](std::size_t i) {
    const std::string number = "layer " + std::to_string(i + 1);
    return layers[i].label == "layer" + std::to_string(i + 1) ? number : number + " (" + layers[i].label + ")";
  };
  for (const auto& w : found) {
    const std::string from = w.from == 0 ? "the input" : "the output of " + layer_name(w.from - 1);
    rows[w.from].warnings.push_back(detail::drift_sentence("forward", "E[a^2], the second moment of the signal,", w, from,
                                                           "to the output of " + layer_name(w.to - 1),
                                                           options.warn_factor));
  }
  found.clear();
  detail::find_drifts(bwd_unit, bwd_layer, bwd_part, 0, n, log_limit, found);
  std::sort(found.begin(), found.end(), [](const auto& a, const auto& b) { return a.from < b.from; });
  for (const auto& w : found) {
    // The run starts where the pass enters it: the top layer for the loss gradient
    // (point 0), else the layer of its first delta (index n - from).
    const std::string from = w.from == 0 ? "the loss gradient at the output"
                                         : "the pre-activations of " + layer_name(n - w.from);
    rows[w.from == 0 ? n - 1 : n - w.from].warnings.push_back(
        detail::drift_sentence("backward", "E[(dL/dh)^2], the second moment of the gradient,", w, from,
                               "down to the pre-activations of " + layer_name(n - w.to), options.warn_factor));
  }
  return rows;
}

/// The normalizer-free scaling (residual_scaling::normalization_free) of a block about to
/// be added on top of `stack`: beta = sqrt(E[x^2]) of the stack's top as predicted (its
/// input when it has no layers; on a feature map the mean over positions), so that the
/// branch reads inputs of unit second moment, and the branch output times alpha.
inline residual_scaling normalization_free_scaling(const layer_stack& stack, double alpha) {
  const double x2 = stack.empty() ? stack.input_second_moment() : predict(stack).back().activation_moment;
  if (!(std::isfinite(x2) && x2 > 0.0)) {
    detail::reject_argument<std::domain_error>("kindling::normalization_free_scaling", "stack",
                                               "a stack whose top has E[x^2] = " + detail::argument_text(x2),
                                               "a finite, positive second moment to divide the branch input by");
  }
  return residual_scaling::normalization_free(alpha, std::sqrt(x2));
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_MEAN_FIELD_HPP
