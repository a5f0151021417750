// kindling/propagate/stack.hpp: a description of a layer stack -- widths, activations,
// weight variance (from a scheme or given), bias variance -- that the analytic
// propagation (mean_field.hpp, linear.hpp), the measured pass (measure.hpp) and the
// diagnostics (diagnose.hpp) share.
//
// Layer l (1-based in the formulas below, 0-based in code) computes
//   h_l = W_l a_{l-1} + b_l,   a_l = phi_l(h_l),   a_0 = the input x,
// W_l with i.i.d. zero-mean entries of variance Var W_l, b_l with variance sigma_b,l^2.
// Dense layers take their fans from `dense`; convolutions from `convolution` (fan_in =
// in/groups * receptive field, fan_out = out/groups * receptive field).
//
// Spatial stacks.  A stack built with an input extent (layer_stack(channels, {H, W}))
// carries feature maps: a convolution added on top of a map is placed on it
// (convolution_map.hpp: stride, padding, dilation), so the prediction can follow every
// output position (borders that read padding included) and the measured pass can run
// it.  A dense layer on top of a map reads the flattened map (channels x positions
// features, channel-major).  A convolution on a stack without an extent is analysed
// through its fans only, as if every output position were interior.
//
// Residual blocks.  add_residual(branch, ...) appends the branch's layers (labels
// "block.layer...") and then a sum layer that closes the block:
//     x_{l+1} = skip(x_l) + s branch(x_l),
// skip the identity or a dense projection, s the branch scale (residual_scaling), with
// no nonlinearity after the sum (the pre-activation form, He et al., ECCV 2016, from
// memory).  The sum's row reports the residual stream x_{l+1}.
#ifndef KINDLING_PROPAGATE_STACK_HPP
#define KINDLING_PROPAGATE_STACK_HPP

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <functional>
#include <optional>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "../fan.hpp"
#include "fixup.hpp"
#include "convolution_map.hpp"
#include "../gain.hpp"
#include "../random/sample.hpp"
#include "../schemes/fixed.hpp"
#include "../schemes/scheme.hpp"

namespace kindling {

namespace detail {



// Normal mass beyond |z| = 13 is 1.2e-38; if f(x)^2 times the density there is not
// negligible against the whole integral, the second moment does not exist (or the
// range misses it), and any number the quadrature gives is meaningless.
template <class F>
double checked_moment(const F& f, std::optional<double> kink, double variance, const char* where,
                      const char* what, const std::string& name) {
  const double split = kink.value_or(0.0);
  const double m = gaussian_expectation_split(f, split, 0.0, variance);
  if (variance == 0.0) return m;
  const double sd = std::sqrt(variance);
  constexpr double edge_density = 1.0279773571668917e-37;  // exp(-13^2/2)/sqrt(2 pi)
  const double tail = (std::fabs(f(13.0 * sd)) + std::fabs(f(-13.0 * sd))) * edge_density;
  bool ok = std::isfinite(m) && std::isfinite(tail);
  if (ok && tail > 1e-12 * std::fabs(m)) {
    // m may be ~0 by cancellation (a mean): judge the tail against E|f| instead.
    const double scale =
        gaussian_expectation_split([&f](double x) { return std::fabs(f(x)); }, split, 0.0, variance);
    ok = std::isfinite(scale) && tail <= 1e-12 * scale;
  }
  if (!ok) {
    reject_argument<std::domain_error>(where, "variance", argument_text(variance),
                                       std::string("a variance at which ") + what + " of activation '" + name +
                                           "' exists (here it does not exist: the integrand does not decay under the normal "
                                           "density)");
  }
  return m;
}

}  // namespace detail

/// An activation as the analyses see it: phi, phi' and where phi has a kink.
/// Built from a gain.hpp `activation` (implicitly) or from any pair of callables.
class nonlinearity {
 public:
  nonlinearity(const activation& a)  // NOLINT: implicit, an activation is a nonlinearity
      : name_(a.name()), value_([a](double x) { return a(x); }),
        slope_([a](double x) { return a.derivative(x); }), kink_(a.kink()) {}

  /// Any callable phi with its derivative; `kink` where either is not smooth.
  static nonlinearity custom(std::string name, std::function<double(double)> phi,
                             std::function<double(double)> derivative,
                             std::optional<double> kink = std::nullopt) {
    if (!phi || !derivative) {
      detail::reject_argument<std::invalid_argument>("kindling::nonlinearity::custom", !phi ? "phi" : "derivative",
                                                     "an empty function", "a callable");
    }
    if (kink && !std::isfinite(*kink)) {
      detail::reject_argument<std::domain_error>("kindling::nonlinearity::custom", "kink", detail::argument_text(*kink),
                                                 "a finite number");
    }
    return nonlinearity(std::move(name), std::move(phi), std::move(derivative), kink);
  }

  const std::string& name() const noexcept { return name_; }
  std::optional<double> kink() const noexcept { return kink_; }
  double operator()(double x) const { return value_(x); }
  double slope(double x) const { return slope_(x); }

  /// E[phi(sqrt(q) z)^2], z ~ N(0, 1), by the split Gauss-Legendre rule of gain.hpp
  /// (accurate to ~1e-15 also for tanh at large q, where Gauss-Hermite loses digits).
  double second_moment(double q) const {
    const auto f = [this](double x) { const double y = value_(x); return y * y; };
    return detail::checked_moment(f, kink_, q, "kindling::nonlinearity::second_moment",
                                  "E[phi(x)^2]", name_);
  }
  /// E[phi'(sqrt(q) z)^2].
  double slope_second_moment(double q) const {
    const auto f = [this](double x) { const double y = slope_(x); return y * y; };
    return detail::checked_moment(f, kink_, q, "kindling::nonlinearity::slope_second_moment",
                                  "E[phi'(x)^2]", name_);
  }
  /// E[phi(sqrt(q) z)].
  double mean(double q) const {
    return detail::checked_moment(value_, kink_, q, "kindling::nonlinearity::mean", "E[phi(x)]",
                                  name_);
  }
  /// d/dq E[phi(sqrt(q) z)^2] = E[phi(x) phi'(x) x] / q at x = sqrt(q) z (Stein's lemma).
  double second_moment_slope(double q) const {
    if (q <= 0.0) {
      const double d = slope_(0.0);  // the q -> 0 limit for phi(0) = 0: phi'(0)^2
      return d * d;
    }
    const auto f = [this](double x) { return value_(x) * slope_(x) * x; };
    return detail::checked_moment(f, kink_, q, "kindling::nonlinearity::second_moment_slope",
                                  "E[phi(x) phi'(x) x]", name_) / q;
  }

 private:
  nonlinearity(std::string name, std::function<double(double)> phi,
               std::function<double(double)> derivative, std::optional<double> kink)
      : name_(std::move(name)), value_(std::move(phi)), slope_(std::move(derivative)),
        kink_(kink) {}

  std::string name_;
  std::function<double(double)> value_;
  std::function<double(double)> slope_;
  std::optional<double> kink_;
};

namespace detail {
template <class S, class = void>
struct has_variance : std::false_type {};
template <class S>
struct has_variance<S, std::void_t<decltype(std::declval<const S&>().variance(fans{}))>>
    : std::true_type {};
}  // namespace detail

/// Per-element variance of the weights a scheme draws for these fans. Found through
/// the scheme's variance(fans) (Glorot, He, LeCun, fan_scaled) and overloads of
/// weight_variance_of (fixed_normal, fixed_uniform here; orthogonal in measure.hpp).
template <class Scheme, std::enable_if_t<detail::has_variance<Scheme>::value, int> = 0>
double weight_variance_of(const Scheme& scheme, const fans& f) {
  return scheme.variance(f);
}

/// How the branch of a residual block is scaled at initialization.
///   none:          x_{l+1} = skip(x_l) + branch(x_l); with He branches the stream's
///                  second moment grows by the branch's share every block (Hanin &
///                  Rolnick, NeurIPS 2018: the sum of the branch scales controls it).
///   inverse_sqrt:  the branch output times 1/sqrt(blocks), so L blocks add about as
///                  much as one (a common rule; Hanin & Rolnick 2018 motivate a summable
///                  series of scales).
///   fixup:         Fixup's rule (Zhang, Dauphin & Ma, ICLR 2019, sec. 3): the first
///                  m - 1 weight layers of a branch of m scaled by blocks^(-1/(2m-2))
///                  (fixup_factor), the last one zero; zero_last = false keeps the last
///                  layer as drawn (the scaling alone, to see what it does).
///   normalization_free: x_{l+1} = x_l + alpha branch(x_l / beta), the rule of
///                  normalizer-free residual networks (Brock, De & Smith, ICLR 2021, from
///                  memory): beta the stream's expected standard deviation at the block's
///                  input, so the branch reads unit-variance inputs, and with a
///                  variance-preserving branch Var(x_{l+1}) = Var(x_l) + alpha^2.  The
///                  1/beta is folded into the branch's first weight layer (it is linear in
///                  its input); normalization_free_scaling(stack, alpha) in mean_field.hpp
///                  takes beta from the prediction of the stack below the block.
struct residual_scaling {
  enum class rule { none, inverse_sqrt, fixup, normalization_free };
  rule kind = rule::none;
  std::uint64_t blocks = 1;
  bool zero_last = true;
  double alpha = 1.0;  // normalization_free: the branch output's scale
  double beta = 1.0;   // normalization_free: the branch input is divided by it

  static residual_scaling none() { return {}; }
  static residual_scaling inverse_sqrt(std::uint64_t blocks) { return {rule::inverse_sqrt, blocks, true}; }
  static residual_scaling fixup(std::uint64_t blocks, bool zero_last = true) {
    return {rule::fixup, blocks, zero_last};
  }
  static residual_scaling normalization_free(double alpha, double beta) {
    return {rule::normalization_free, 1, true, alpha, beta};
  }
};

/// One layer of a stack.
struct stack_layer {
  std::string label;             // "layer1", ... unless given; weights use label + ".weight"
  kindling::fans fans;           // fan_in, fan_out of W_l
  std::uint64_t in_width = 0;    // features (channels of a convolution) into the layer
  std::uint64_t width = 0;       // features (channels) out of it
  bool dense = true;             // false: a convolution or a residual sum
  /// The sum closing a residual block: h = skip(output of layer skip_from - 1, or the
  /// stack's input when skip_from = 0) + branch_scale * (output of the layer below).
  /// `draw`, `fans` and `weight_variance` are the projection's when projected.
  bool residual = false;
  bool projected = false;
  std::size_t skip_from = 0;
  double branch_scale = 1.0;
  /// A convolution placed on a feature map (spatial stacks): its geometry; empty for
  /// dense layers and for convolutions analysed through their fans only.
  std::optional<convolution_map> map;
  nonlinearity act = activation::identity();
  double weight_variance = 0;    // Var W_l per element
  double bias_variance = 0;      // sigma_b,l^2
  std::string scheme;            // the scheme's name, or "normal(variance)"
  /// Fills the weight from a stream as the scheme does: [width, in_width] (dense) or
  /// [out_channels, in_channels / groups, kernel...] (convolutions placed on a map).
  std::function<void(const strided_view<double>&, const stream&)> draw;

  /// sigma_w^2 of the mean-field papers: fan_in Var W (forward), fan_out Var W (backward).
  double forward_scale() const { return static_cast<double>(fans.fan_in) * weight_variance; }
  double backward_scale() const { return static_cast<double>(fans.fan_out) * weight_variance; }
  /// Output positions (1 for a dense layer) and units (width x positions).
  std::uint64_t positions() const noexcept { return map ? map->out_positions() : extent_positions; }
  /// Positions of a residual sum on a feature map (the block's input extent), else 1.
  std::uint64_t extent_positions = 1;
  std::vector<std::uint64_t> sum_extent;
  std::uint64_t units() const noexcept { return width * positions(); }
};

/// A stack of layers fed by an input of `input_width` features whose entries have
/// second moment `input_second_moment` (E[x^2]; 1 for standardized data).
class layer_stack {
 public:
  explicit layer_stack(std::uint64_t input_width, double input_second_moment = 1.0)
      : input_width_(input_width), input_moment_(input_second_moment) {
    check_input("kindling::layer_stack");
  }

  /// A stack fed by feature maps: `input_channels` channels over the spatial
  /// `input_extent` (1 to 3 axes, e.g. {length} or {height, width}), each entry with
  /// second moment `input_second_moment`.  (A named function, not a constructor: a
  /// braced {64} would otherwise bind to the second moment.)
  static layer_stack feature_maps(std::uint64_t input_channels, std::vector<std::uint64_t> input_extent,
                                  double input_second_moment = 1.0) {
    return layer_stack(input_channels, std::move(input_extent), input_second_moment, 0);
  }

 private:
  layer_stack(std::uint64_t input_channels, std::vector<std::uint64_t> input_extent, double input_second_moment,
              int /* tag */)
      : input_width_(input_channels), input_moment_(input_second_moment), input_extent_(std::move(input_extent)) {
    constexpr const char* where = "kindling::layer_stack::feature_maps";
    check_input(where);
    if (input_extent_.empty() || input_extent_.size() > 3) {
      throw std::invalid_argument(std::string(where) + ": argument 'input_extent' = " +
                                  detail::shape_text(input_extent_) + " has " + std::to_string(input_extent_.size()) +
                                  " axes, expected 1 to 3");
    }
    for (std::uint64_t e : input_extent_) detail::require_positive(e, where, "input_extent");
    const std::uint64_t positions = detail::checked_product(input_extent_, where, "input positions");
    detail::checked_product(positions, input_channels, where, "input channels x positions");
    if (positions > (std::uint64_t{1} << 24)) {  // the analyses keep a second moment a position
      throw std::length_error(std::string(where) + ": argument 'input_extent' = " + detail::shape_text(input_extent_) +
                              " has " + std::to_string(positions) + " positions, expected at most 2^24");
    }
  }

  void check_input(const char* where) const {
    detail::require_positive(input_width_, where, "input_width");
    const double input_second_moment = input_moment_;
    if (!(std::isfinite(input_second_moment) && input_second_moment > 0.0)) {
      throw std::domain_error(std::string(where) + ": argument 'input_second_moment' = " +
                              detail::argument_text(input_second_moment) +
                              ", expected a finite number > 0");
    }
  }

 public:
  /// A dense layer of `width` units after the current top, weights drawn by `scheme`.
  template <class Scheme>
  layer_stack& add_dense(std::uint64_t width, const nonlinearity& act, const Scheme& scheme,
                         double bias_variance = 0.0, std::string label = {}) {
    constexpr const char* where = "kindling::layer_stack::add_dense";
    detail::require_positive(width, where, "width");
    const dense d(top_features(), width);
    const double v = weight_variance_of(scheme, d.layer_fans());
    stack_layer layer = make(where, d.layer_fans(), width, act, v, bias_variance, std::move(label));
    layer.scheme = scheme.name();
    const std::uint64_t in = top_features();
    layer.draw = [scheme, in, width](const strided_view<double>& w, const stream& s) {
      initialize(w, dense(in, width), scheme, s);
    };
    layers_.push_back(std::move(layer));
    return *this;
  }

  /// A dense layer whose weights are N(0, weight_variance) (a distribution, no scheme).
  layer_stack& add_dense_with_variance(std::uint64_t width, const nonlinearity& act,
                                       double weight_variance, double bias_variance = 0.0,
                                       std::string label = {}) {
    constexpr const char* where = "kindling::layer_stack::add_dense_with_variance";
    detail::require_positive(width, where, "width");
    const dense d(top_features(), width);
    stack_layer layer =
        make(where, d.layer_fans(), width, act, weight_variance, bias_variance, std::move(label));
    layer.scheme = "normal(" + detail::argument_text(weight_variance) + ")";
    const double sd = std::sqrt(weight_variance);
    layer.draw = [sd](const strided_view<double>& w, const stream& s) {
      fill(w, dist::normal{0.0, sd}, s);
    };
    layers_.push_back(std::move(layer));
    return *this;
  }

  /// A convolution after the current top (its in_channels must be the top width).  On a
  /// feature map it is placed with stride 1, no padding and no dilation (the overload
  /// below takes a geometry); on a stack without an extent it is analysed through its
  /// fans only (predict), not runnable by measure.hpp.
  template <class Scheme>
  layer_stack& add_convolution(const convolution& conv, const nonlinearity& act,
                               const Scheme& scheme, double bias_variance = 0.0,
                               std::string label = {}) {
    if (!top_extent().empty()) return add_convolution(conv, convolution_geometry{}, act, scheme, bias_variance, std::move(label));
    constexpr const char* where = "kindling::layer_stack::add_convolution";
    require_channels(conv, where);
    const double v = weight_variance_of(scheme, conv.layer_fans());
    stack_layer layer =
        make(where, conv.layer_fans(), conv.out_channels(), act, v, bias_variance, std::move(label));
    layer.in_width = conv.in_channels();
    layer.dense = false;
    layer.scheme = scheme.name();
    layers_.push_back(std::move(layer));
    return *this;
  }

  /// A convolution placed on the current top feature map with `geometry` (stride,
  /// padding, dilation): predicted position by position and runnable by measure.hpp.
  /// Its weight is drawn in the [out, in / groups, kernel...] layout whatever `conv`'s
  /// layout (the values of a parameter depend on its logical shape).
  template <class Scheme>
  layer_stack& add_convolution(const convolution& conv, const convolution_geometry& geometry,
                               const nonlinearity& act, const Scheme& scheme, double bias_variance = 0.0,
                               std::string label = {}) {
    constexpr const char* where = "kindling::layer_stack::add_convolution";
    require_channels(conv, where);
    if (top_extent().empty()) {
      detail::reject_argument<std::invalid_argument>(
          where, "geometry", "a placement on a feature map",
          "a stack whose top has a spatial extent (built with an input extent and no dense layer below the "
          "convolution)");
    }
    convolution_map placed(conv, top_extent(), geometry);
    const double v = weight_variance_of(scheme, conv.layer_fans());
    stack_layer layer =
        make(where, conv.layer_fans(), conv.out_channels(), act, v, bias_variance, std::move(label));
    layer.in_width = conv.in_channels();
    layer.dense = false;
    layer.map = std::move(placed);
    layer.scheme = scheme.name();
    const convolution drawn(conv.in_channels(), conv.out_channels(), conv.kernel(), conv.groups());
    layer.draw = [scheme, drawn](const strided_view<double>& w, const stream& s) { initialize(w, drawn, scheme, s); };
    layers_.push_back(std::move(layer));
    return *this;
  }

  /// A residual block on the current top: `branch` (a stack whose input is the top:
  /// layer_stack(top_width()) or feature_maps(top_width(), top_extent())), its layers
  /// appended under "label.", then the sum x + s branch(x) with an identity skip.  The
  /// branch must end in the top's width (and extent).  Its weights are drawn as its
  /// schemes say, then scaled by `scaling`.
  layer_stack& add_residual(const layer_stack& branch, const residual_scaling& scaling = residual_scaling::none(),
                            std::string label = {}) {
    append_residual(branch, scaling, std::move(label), nullptr);
    return *this;
  }

  /// The same with a projection skip: a dense layer from the top to the branch's output
  /// width, weights drawn by `projection` (stacks without an extent only).
  template <class Scheme>
  layer_stack& add_projected_residual(const layer_stack& branch, const Scheme& projection,
                                      const residual_scaling& scaling = residual_scaling::none(),
                                      std::string label = {}) {
    constexpr const char* where = "kindling::layer_stack::add_projected_residual";
    if (!top_extent().empty() || (!branch.empty() && !branch.top_extent().empty())) {
      detail::reject_argument<std::invalid_argument>(
          where, "branch", "a branch that starts or ends on a feature map",
          "a projection skip between features (use add_residual for an identity skip on maps)");
    }
    const std::uint64_t in = top_features();
    const std::uint64_t out = branch.empty() ? 0 : branch.top_width();
    stack_layer projection_layer;
    if (out > 0) {
      const dense d(in, out);
      projection_layer.fans = d.layer_fans();
      projection_layer.weight_variance = weight_variance_of(projection, d.layer_fans());
      projection_layer.scheme = projection.name();
      projection_layer.draw = [projection, in, out](const strided_view<double>& w, const stream& s) {
        initialize(w, dense(in, out), projection, s);
      };
    }
    append_residual(branch, scaling, std::move(label), &projection_layer);
    return *this;
  }

  std::uint64_t input_width() const noexcept { return input_width_; }
  double input_second_moment() const noexcept { return input_moment_; }
  std::size_t depth() const noexcept { return layers_.size(); }
  bool empty() const noexcept { return layers_.empty(); }
  const std::vector<stack_layer>& layers() const noexcept { return layers_; }
  const stack_layer& operator[](std::size_t i) const { return layers_.at(i); }
  std::uint64_t top_width() const noexcept {
    return layers_.empty() ? input_width_ : layers_.back().width;
  }
  /// The spatial extent of the input, empty for a stack of features.
  const std::vector<std::uint64_t>& input_extent() const noexcept { return input_extent_; }
  /// The spatial extent of the top (empty when it is a dense layer or a stack of features).
  const std::vector<std::uint64_t>& top_extent() const noexcept {
    if (layers_.empty()) return input_extent_;
    const stack_layer& l = layers_.back();
    return l.map ? l.map->out_extent() : l.sum_extent;
  }
  /// Input positions (1 without an extent) and input units (channels x positions).
  std::uint64_t input_positions() const noexcept {
    std::uint64_t p = 1;
    for (std::uint64_t e : input_extent_) p *= e;  // bounded by the constructor
    return p;
  }
  std::uint64_t input_units() const noexcept { return input_width_ * input_positions(); }
  /// What a dense layer on top reads: the top's units (a feature map flattened).
  std::uint64_t top_features() const noexcept {
    return layers_.empty() ? input_units() : layers_.back().units();
  }

  /// Throws std::invalid_argument naming `where` if the stack has no layers.
  void require_layers(const char* where) const {
    if (layers_.empty()) {
      detail::reject_argument<std::invalid_argument>(where, "stack", "a stack of no layers", "at least one layer");
    }
  }

 private:
  stack_layer make(const char* where, const fans& f, std::uint64_t width, const nonlinearity& act,
                   double weight_variance, double bias_variance, std::string label) const {
    if (!(std::isfinite(weight_variance) && weight_variance >= 0.0)) {
      throw std::domain_error(std::string(where) + ": argument 'weight_variance' = " +
                              detail::argument_text(weight_variance) +
                              ", expected a finite number >= 0");
    }
    if (!(std::isfinite(bias_variance) && bias_variance >= 0.0)) {
      throw std::domain_error(std::string(where) + ": argument 'bias_variance' = " +
                              detail::argument_text(bias_variance) +
                              ", expected a finite number >= 0");
    }
    stack_layer layer;
    layer.label = label.empty() ? "layer" + std::to_string(layers_.size() + 1) : std::move(label);
    layer.fans = f;
    layer.in_width = top_features();
    layer.width = width;
    layer.act = act;
    layer.weight_variance = weight_variance;
    layer.bias_variance = bias_variance;
    return layer;
  }

  // beta in a scheme's name: four digits are enough to read (weight_sd has the value).
  static std::string nf_beta_text(double beta) {
    char text[32];
    std::snprintf(text, sizeof text, "%.4g", beta);
    return text;
  }

  void append_residual(const layer_stack& branch, const residual_scaling& scaling, std::string label,
                       const stack_layer* projection) {
    const char* where = projection ? "kindling::layer_stack::add_projected_residual" : "kindling::layer_stack::add_residual";
    if (branch.empty()) {
      detail::reject_argument<std::invalid_argument>(where, "branch", "a branch of no layers", "at least one layer");
    }
    if (branch.input_width() != top_width() || branch.input_extent() != top_extent()) {
      detail::reject_argument<std::invalid_argument>(
          where, "branch",
          "a branch reading " + std::to_string(branch.input_width()) + " channels over extent " +
              detail::shape_text(branch.input_extent()),
          "the top of the stack, " + std::to_string(top_width()) + " over " + detail::shape_text(top_extent()));
    }
    if (!projection && (branch.top_width() != top_width() || branch.top_extent() != top_extent())) {
      detail::reject_argument<std::invalid_argument>(
          where, "branch",
          "a branch ending in " + std::to_string(branch.top_width()) + " channels over extent " +
              detail::shape_text(branch.top_extent()),
          std::to_string(top_width()) + " over " + detail::shape_text(top_extent()) +
              " to match its identity skip (add_projected_residual projects the skip)");
    }
    if (scaling.blocks == 0) {
      detail::reject_argument<std::invalid_argument>(where, "scaling.blocks", "0", "at least 1");
    }
    if (scaling.kind == residual_scaling::rule::normalization_free) {
      if (!(std::isfinite(scaling.alpha) && scaling.alpha >= 0.0)) {
        detail::reject_argument<std::invalid_argument>(where, "scaling.alpha", detail::argument_text(scaling.alpha),
                                                       "a finite number >= 0");
      }
      if (!(std::isfinite(scaling.beta) && scaling.beta > 0.0)) {
        detail::reject_argument<std::invalid_argument>(where, "scaling.beta", detail::argument_text(scaling.beta),
                                                       "a finite number > 0 (the stream's expected standard deviation)");
      }
    }
    const std::size_t m = branch.depth();
    if (scaling.kind == residual_scaling::rule::fixup && m < 2) {
      detail::reject_argument<std::invalid_argument>(
          where, "branch", "a branch of 1 layer", "at least 2 layers for Fixup's rule (its exponent -1/(2m-2) needs m >= 2)");
    }
    std::size_t blocks_so_far = 0;
    for (const stack_layer& l : layers_) blocks_so_far += l.residual;
    if (label.empty()) label = "block" + std::to_string(blocks_so_far + 1);
    const std::size_t source = layers_.size();
    const std::uint64_t skip_features = top_features();
    const std::vector<std::uint64_t> extent = top_extent();
    const std::uint64_t positions = layers_.empty() ? input_positions() : layers_.back().positions();
    const double f = scaling.kind == residual_scaling::rule::fixup ? fixup_factor(scaling.blocks, m) : 1.0;
    for (std::size_t k = 0; k < m; ++k) {
      stack_layer l = branch.layers()[k];
      l.label = label + "." + l.label;
      const bool fixup = scaling.kind == residual_scaling::rule::fixup && (k + 1 < m || scaling.zero_last);
      const bool nf_input = scaling.kind == residual_scaling::rule::normalization_free && k == 0;
      if (fixup || nf_input) {
        const bool zero = fixup && k + 1 == m;
        const double factor = zero ? 0.0 : fixup ? f : 1.0 / scaling.beta;
        l.weight_variance *= factor * factor;
        l.scheme += zero     ? " zeroed (Fixup)"
                    : fixup ? " x " + detail::argument_text(factor) + " (Fixup)"
                            : " / " + nf_beta_text(scaling.beta) + " (NF)";
        if (l.draw) {
          auto inner = l.draw;
          l.draw = [inner, factor](const strided_view<double>& w, const stream& st) {
            inner(w, st);
            detail::for_each_element(w, [factor](double& x) { x *= factor; });
          };
        }
      }
      layers_.push_back(std::move(l));
    }
    stack_layer sum = projection ? *projection : stack_layer{};
    if (!projection) {
      sum.fans = fans{skip_features, skip_features, 1};
      sum.scheme = "identity skip";
      sum.draw = [](const strided_view<double>&, const stream&) {};
    }
    sum.label = std::move(label);
    sum.in_width = skip_features;
    sum.width = branch.top_width();
    sum.dense = false;
    sum.residual = true;
    sum.projected = projection != nullptr;
    sum.skip_from = source;
    sum.branch_scale = scaling.kind == residual_scaling::rule::inverse_sqrt
                           ? 1.0 / std::sqrt(static_cast<double>(scaling.blocks))
                       : scaling.kind == residual_scaling::rule::normalization_free ? scaling.alpha
                                                                                    : 1.0;
    sum.extent_positions = projection ? 1 : positions;
    sum.sum_extent = projection ? std::vector<std::uint64_t>{} : extent;
    layers_.push_back(std::move(sum));
  }

  void require_channels(const convolution& conv, const char* where) const {
    if (conv.in_channels() != top_width()) {
      detail::reject_argument<std::invalid_argument>(where, "conv.in_channels", std::to_string(conv.in_channels()),
                                                     "the width of the layer below, " + std::to_string(top_width()));
    }
  }

  std::uint64_t input_width_;
  double input_moment_;
  std::vector<std::uint64_t> input_extent_;
  std::vector<stack_layer> layers_;
};

/// Fixed normal weights: stddev^2. The analyses assume zero-mean weights.
inline double weight_variance_of(const fixed_normal& s, const fans&) {
  if (s.mean != 0.0) {
    detail::reject_argument<std::domain_error>("kindling::weight_variance_of", "scheme.mean",
                                               detail::argument_text(s.mean),
                                               "0 (propagation assumes zero-mean weights)");
  }
  return s.stddev * s.stddev;
}
/// Fixed uniform weights on [lo, hi) with lo = -hi: (hi - lo)^2 / 12.
inline double weight_variance_of(const fixed_uniform& s, const fans&) {
  if (s.lo != -s.hi) {
    detail::reject_argument<std::domain_error>(
        "kindling::weight_variance_of", "scheme",
        "fixed_uniform on [" + detail::argument_text(s.lo) + ", " + detail::argument_text(s.hi) + ")",
        "a range symmetric about 0 (zero-mean weights)");
  }
  return (s.hi - s.lo) * (s.hi - s.lo) / 12.0;
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_STACK_HPP
