// kindling/propagate/lsuv.hpp (Eigen): layer-sequential unit-variance calibration, LSUV
// (Mishkin & Matas, "All you need is a good init", ICLR 2016).  The method, as we
// remember the paper (from memory): start every layer from an orthonormal weight
// (Saxe et al. 2014), then, layer by layer from the input up, push a batch of real
// data through the network, measure the variance v of the layer's output and divide
// its weight by sqrt(v); repeat until |v - 1| <= tolerance (the paper: 0.1) or until
// the iteration cap (the paper: 10).
//
// The forward pass is the user's own: each layer comes with a callable that runs the
// user's network on the calibration batch (with the weights as they are now) and
// returns this layer's output -- as an Eigen matrix or array, whose variance is taken
// here, or as the variance itself.  So the calibration works for any layer kindling
// has no description of: only the weight view and the callable are needed.  Which
// output to return is the caller's choice; the paper measures the output of the
// convolution or inner-product layer (from memory), i.e. before the nonlinearity.
//
// Variance here is the population variance of all entries about their mean (units and
// batch together).  Layers whose output does not scale with the weight -- a callback
// that ignores it, a bias or normalization that dominates -- never reach the
// tolerance; the calibration then stops at the cap and the report says which layer,
// what it measured and that the output did not respond to the rescaling.
//
// Failure contract: bad arguments throw before anything is written.  If a callback
// throws or returns a non-finite or negative variance, every weight is restored to its
// value before the call (a copy of all weights is kept for that) and the exception
// propagates.  Stopping at the cap is not an error: the weights keep their last
// rescaling and the report says so.
#ifndef KINDLING_PROPAGATE_LSUV_HPP
#define KINDLING_PROPAGATE_LSUV_HPP

#include <Eigen/Core>

#include <cmath>
#include <cstddef>
#include <cstdio>
#include <functional>
#include <set>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "../audit/result.hpp"
#include "../element.hpp"
#include "../eigen.hpp"
#include "../schemes/orthogonal.hpp"
#include "../schemes/scheme.hpp"
#include "fixup.hpp"

namespace kindling {

namespace detail {
// The population variance of all entries of an Eigen object, about their mean.
template <class Derived>
double entry_variance(const Eigen::DenseBase<Derived>& x) {
  const Eigen::Index n = x.size();
  if (n == 0) return std::nan("");
  const auto d = x.derived().template cast<double>().eval();
  const double mean = d.sum() / static_cast<double>(n);
  return (d.array() - mean).square().sum() / static_cast<double>(n);
}

template <class F>
struct is_std_function : std::false_type {};
template <class R, class... A>
struct is_std_function<std::function<R(A...)>> : std::true_type {};

template <class R>
constexpr bool is_eigen_result = std::is_base_of<Eigen::DenseBase<std::decay_t<R>>, std::decay_t<R>>::value;
}  // namespace detail

/// One layer to calibrate: a name, a view of its weight, how the weight is laid out
/// (for the orthogonal start) and the callable that runs the user's forward pass.
template <class E>
class lsuv_layer {
 public:
  /// `forward()` returns this layer's output on the calibration batch (any Eigen dense
  /// object) or its variance (a number).  `layer` is a kindling layer description
  /// (dense, convolution, ...) whose weight shape the view must have.
  template <class Layer, class Forward>
  lsuv_layer(std::string label, const strided_view<E>& weight, const Layer& layer, Forward forward)
      : lsuv_layer(std::move(label), weight, info_of(layer, weight), std::move(forward)) {}

  /// The same with the fans and layout given directly (weights kindling has no layer for).
  template <class Forward>
  lsuv_layer(std::string label, const strided_view<E>& weight, const weight_info& info, Forward forward)
      : label_(std::move(label)), weight_(weight), info_(info), forward_(wrap(std::move(forward))) {
    if (label_.empty()) {
      detail::reject_argument<std::invalid_argument>(
          "kindling::lsuv_layer", "label", "''", "a layer name (the orthogonal start draws from stream label + \".weight\")");
    }
  }

  const std::string& label() const noexcept { return label_; }
  const strided_view<E>& weight() const noexcept { return weight_; }
  const weight_info& info() const noexcept { return info_; }
  /// Runs the user's forward pass and returns the output variance.
  double measure() const { return forward_(); }

 private:
  template <class Layer>
  static weight_info info_of(const Layer& layer, const strided_view<E>& weight) {
    static_assert(!detail::is_packed<Layer>::value,
                  "LSUV rescales a weight as one block; give each block of a packed layer its own lsuv_layer");
    return weight_info_of(layer, weight.global_shape());
  }

  template <class Forward>
  static std::function<double()> wrap(Forward forward) {
    using result = decltype(forward());
    static_assert(detail::is_eigen_result<result> || std::is_arithmetic<std::decay_t<result>>::value,
                  "the forward callable must return the layer's output (an Eigen object) or its variance (a number)");
    if constexpr (std::is_pointer<Forward>::value || detail::is_std_function<Forward>::value) {
      if (!forward) {
        detail::reject_argument<std::invalid_argument>("kindling::lsuv_layer", "forward", "an empty function",
                                                       "a callable");
      }
    }
    if constexpr (detail::is_eigen_result<result>) {
      return [f = std::move(forward)]() mutable { return detail::entry_variance(f()); };
    } else {
      return [f = std::move(forward)]() mutable { return static_cast<double>(f()); };
    }
  }

  std::string label_;
  strided_view<E> weight_;
  weight_info info_;
  std::function<double()> forward_;
};

struct lsuv_options {
  double tolerance = 0.1;           // stop when |v - 1| <= tolerance (paper: 0.1, from memory)
  std::size_t max_iterations = 10;  // rescalings a layer at most (paper: 10, from memory)
};

/// What happened to one layer.
struct lsuv_layer_result {
  std::string label;
  std::vector<double> variances;  // measured: before any rescaling, then after each one
  double factor = 1;              // product of the rescalings applied to the weight
  std::size_t rescalings = 0;
  bool converged = false;
  std::string sentence;           // one sentence saying what happened
  double initial_variance() const { return variances.front(); }
  double final_variance() const { return variances.back(); }
};

struct lsuv_report {
  double tolerance = 0;
  std::size_t max_iterations = 0;
  std::vector<lsuv_layer_result> layers;

  bool converged() const noexcept {
    for (const auto& l : layers) if (!l.converged) return false;
    return true;
  }
  explicit operator bool() const noexcept { return converged(); }
  const lsuv_layer_result* find(const std::string& label) const noexcept {
    for (const auto& l : layers) if (l.label == label) return &l;
    return nullptr;
  }
  /// One sentence per layer that did not reach the tolerance, or a one-line summary.
  std::string explain() const {
    std::string text;
    for (const auto& l : layers) {
      if (l.converged) continue;
      if (!text.empty()) text += "\n";
      text += l.sentence;
    }
    if (!text.empty()) return text;
    return "LSUV: all " + std::to_string(layers.size()) + " layers have output variance within " +
           detail::short_number(tolerance) + " of 1";
  }
  /// Every layer's sentence, one a line.
  std::string table() const {
    std::string text;
    for (const auto& l : layers) text += l.sentence + "\n";
    return text;
  }
};

namespace detail {

inline void check_lsuv_options(const lsuv_options& o, const char* where) {
  if (!(std::isfinite(o.tolerance) && o.tolerance > 0.0 && o.tolerance < 1.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.tolerance' = " + argument_text(o.tolerance) +
                            ", expected a number in (0, 1)");
  }
  if (o.max_iterations == 0) {
    throw std::invalid_argument(std::string(where) +
                                ": argument 'options.max_iterations' = 0, expected at least 1 rescaling");
  }
}

template <class E>
void check_lsuv_layers(const std::vector<lsuv_layer<E>>& layers, const char* where) {
  if (layers.empty()) {
    reject_argument<std::invalid_argument>(where, "layers", "an empty list", "at least one layer");
  }
  std::set<std::string> seen;
  for (const auto& l : layers) {
    if (!seen.insert(l.label()).second) {
      reject_argument<std::invalid_argument>(where, "layers", "a list with the label '" + l.label() + "' twice",
                                             "distinct labels (each names its own weight stream)");
    }
  }
}

template <class E>
std::vector<E> copy_weight(const strided_view<E>& v) {
  std::vector<E> out;
  out.reserve(static_cast<std::size_t>(v.size()));
  for_each_element(v, [&out](E& x) { out.push_back(x); });
  return out;
}

template <class E>
void restore_weight(const strided_view<E>& v, const std::vector<E>& saved) {
  std::size_t k = 0;
  for_each_element(v, [&](E& x) { x = saved[k++]; });
}

// x <- x * f in double, rounded back to the element type (nearest even).
template <class E>
void scale_weight(const strided_view<E>& v, double f) {
  using traits = element_traits<E>;
  for_each_element(v, [f](E& x) {
    x = traits::from_compute(static_cast<compute_type_t<E>>(traits::to_double(x) * f), unbounded);
  });
}

inline std::string lsuv_sentence(const lsuv_layer_result& r, const lsuv_options& o) {
  const std::string head = "layer '" + r.label + "': output variance " + short_number(r.initial_variance());
  if (r.converged) {
    if (r.rescalings == 0) return head + ", already within " + short_number(o.tolerance) + " of 1; left as it was";
    return head + " -> " + short_number(r.final_variance()) + " after " + std::to_string(r.rescalings) +
           (r.rescalings == 1 ? " rescaling" : " rescalings") + " (weight factor " + short_number(r.factor) + ")";
  }
  if (r.final_variance() == 0.0) {
    return head + (r.rescalings > 0 ? " -> 0" : "") +
           ": the output is constant on the batch, which no rescaling changes (all-zero weights, dead "
           "units or a constant input?); LSUV left this layer as it is";
  }
  // How strongly the variance followed the rescaling: 1 for an output linear in the
  // weight (v scales by the factor squared), 0 for an output that ignores the weight.
  double moved = 0, asked = 0;
  for (std::size_t k = 0; k + 1 < r.variances.size(); ++k) {
    moved += std::fabs(std::log(r.variances[k + 1] / r.variances[k]));
    asked += std::fabs(std::log(r.variances[k]));
  }
  const double response = asked > 0.0 ? moved / asked : 0.0;
  std::string s = head + " -> " + short_number(r.final_variance()) + " after the cap of " +
                  std::to_string(o.max_iterations) + " rescalings, still outside 1 +- " + short_number(o.tolerance) +
                  " (weight factor " + short_number(r.factor) + ")";
  if (response < 0.1) {
    s += "; the variance did not respond to the weight scale (response " + short_number(response, 2) +
         " of the expected 1): does this layer's forward callable use its weight view? A bias or a "
         "normalization that dominates the output does the same";
  } else {
    s += "; the variance follows the weight scale only partly (response " + short_number(response, 2) +
         "): a bias or a nonlinearity inside the measured output limits what rescaling can do";
  }
  return s;
}

// Calibrates layer by layer; on an exception restores every weight and rethrows.
template <class E>
lsuv_report lsuv_run(const std::vector<lsuv_layer<E>>& layers, const lsuv_options& o,
                     const std::vector<std::vector<E>>& saved, const char* where) {
  const auto restore_all = [&] {
    for (std::size_t k = 0; k < layers.size(); ++k) restore_weight(layers[k].weight(), saved[k]);
  };
  lsuv_report report;
  report.tolerance = o.tolerance;
  report.max_iterations = o.max_iterations;
  try {
    for (const auto& l : layers) {
      lsuv_layer_result r;
      r.label = l.label();
      const auto measure = [&] {
        const double v = l.measure();
        if (!(std::isfinite(v) && v >= 0.0)) {
          throw std::domain_error(std::string(where) + ": the forward callable of layer '" + l.label() +
                                  "' gave output variance " + argument_text(v) +
                                  ", expected a finite number >= 0; every weight was restored to its value "
                                  "before the call");
        }
        r.variances.push_back(v);
        return v;
      };
      double v = measure();
      while (std::fabs(v - 1.0) > o.tolerance && v > 0.0 && r.rescalings < o.max_iterations) {
        const double f = 1.0 / std::sqrt(v);
        scale_weight(l.weight(), f);
        r.factor *= f;
        ++r.rescalings;
        v = measure();
      }
      r.converged = std::fabs(v - 1.0) <= o.tolerance;
      r.sentence = lsuv_sentence(r, o);
      report.layers.push_back(std::move(r));
    }
  } catch (...) {
    restore_all();
    throw;
  }
  return report;
}

}  // namespace detail

/// LSUV as published: an orthogonal start (gain 1, stream s.named(label + ".weight"))
/// for every layer, then the layer-by-layer rescaling.  The layers must be given in
/// forward order: a layer's callable sees the layers below already calibrated.
template <class E>
lsuv_report lsuv_initialize(const std::vector<lsuv_layer<E>>& layers, const stream& s,
                            const lsuv_options& options = {}) {
  constexpr const char* where = "kindling::lsuv_initialize";
  detail::check_lsuv_options(options, where);
  detail::check_lsuv_layers(layers, where);
  const orthogonal start{1.0};
  for (const auto& l : layers) start.check(l.weight().global_shape(), l.info());
  std::vector<std::vector<E>> saved;
  for (const auto& l : layers) saved.push_back(detail::copy_weight(l.weight()));
  try {
    for (const auto& l : layers) initialize(l.weight(), l.info(), start, s.named(l.label() + ".weight"));
  } catch (...) {
    for (std::size_t k = 0; k < layers.size(); ++k) detail::restore_weight(layers[k].weight(), saved[k]);
    throw;
  }
  return detail::lsuv_run(layers, options, saved, where);
}

/// Only the rescaling, from the weights as they are (any scheme the caller used).
template <class E>
lsuv_report lsuv_rescale(const std::vector<lsuv_layer<E>>& layers, const lsuv_options& options = {}) {
  constexpr const char* where = "kindling::lsuv_rescale";
  detail::check_lsuv_options(options, where);
  detail::check_lsuv_layers(layers, where);
  std::vector<std::vector<E>> saved;
  for (const auto& l : layers) saved.push_back(detail::copy_weight(l.weight()));
  return detail::lsuv_run(layers, options, saved, where);
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_LSUV_HPP
