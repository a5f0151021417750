// Activation gains: the factor g by which a scheme's variance-preserving scale
// (LeCun 1/fan_in, Glorot, ...) is multiplied for a given nonlinearity.
//
// Definitions (z ~ N(0, 1)):
//   forward gain  g_f with g_f^2 E[phi(z)^2]  = 1  (He et al., ICCV 2015, sec. 2.2:
//                 Var[y_l] = n_l Var[w_l] E[x_l^2]; the ReLU case is E[relu(z)^2] = 1/2)
//   backward gain g_b with g_b^2 E[phi'(z)^2] = 1  (He et al. 2015, sec. 2.2, backward
//                 case: Var[dx] = n_out Var[w] E[phi'(y)^2] Var[dy])
// Expectations are computed by Gauss-Hermite quadrature, or for integrands with a kink
// by composite Gauss-Legendre on each side of it (see gaussian_expectation_split).
//
// Besides computed gains there is a table (table_gain) with the values in wide use and
// where each comes from.
#ifndef KINDLING_GAIN_HPP
#define KINDLING_GAIN_HPP

#include <cmath>
#include <cstddef>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <type_traits>
#include <utility>
#include <vector>

#include "kindling/detail/error.hpp"
#include "kindling/detail/gauss_hermite.hpp"

namespace kindling {

enum class activation_kind { identity, sigmoid, tanh, relu, leaky_relu, elu, selu, gelu, silu };

// SELU constants, Klambauer et al., "Self-Normalizing Neural Networks", NeurIPS 2017.
inline constexpr double selu_alpha = 1.6732632423543772848;
inline constexpr double selu_lambda = 1.0507009873554804934;

// An activation function with its parameter (leaky ReLU slope, ELU alpha); callable.
class activation {
 public:
  static activation identity() noexcept { return activation(activation_kind::identity, 0.0); }
  static activation sigmoid() noexcept { return activation(activation_kind::sigmoid, 0.0); }
  static activation tanh() noexcept { return activation(activation_kind::tanh, 0.0); }
  static activation relu() noexcept { return activation(activation_kind::relu, 0.0); }
  static activation leaky_relu(double slope) {
    if (!std::isfinite(slope)) {
      detail::reject_argument<std::domain_error>("activation::leaky_relu", "slope", detail::argument_text(slope),
                                                 "a finite number");
    }
    return activation(activation_kind::leaky_relu, slope);
  }
  static activation elu(double alpha = 1.0) {
    if (!(std::isfinite(alpha) && alpha > 0.0)) {
      detail::reject_argument<std::domain_error>("activation::elu", "alpha", detail::argument_text(alpha),
                                                 "a finite positive number");
    }
    return activation(activation_kind::elu, alpha);
  }
  static activation selu() noexcept { return activation(activation_kind::selu, 0.0); }
  // GELU in its exact form x Phi(x) (Hendrycks & Gimpel 2016), not the tanh approximation.
  static activation gelu() noexcept { return activation(activation_kind::gelu, 0.0); }
  // SiLU x sigmoid(x) (Elfwing et al. 2018; "swish" with beta = 1).
  static activation silu() noexcept { return activation(activation_kind::silu, 0.0); }

  activation_kind kind() const noexcept { return kind_; }
  // The slope of leaky_relu, the alpha of elu; 0 for the others.
  double parameter() const noexcept { return parameter_; }

  std::string_view name() const noexcept {
    switch (kind_) {
      case activation_kind::identity: return "identity";
      case activation_kind::sigmoid: return "sigmoid";
      case activation_kind::tanh: return "tanh";
      case activation_kind::relu: return "relu";
      case activation_kind::leaky_relu: return "leaky_relu";
      case activation_kind::elu: return "elu";
      case activation_kind::selu: return "selu";
      case activation_kind::gelu: return "gelu";
      case activation_kind::silu: return "silu";
    }
    return "unknown";
  }

  // Where the function is not smooth (0 for the piecewise ones), for the quadrature.
  std::optional<double> kink() const noexcept {
    switch (kind_) {
      case activation_kind::relu:
      case activation_kind::leaky_relu:
      case activation_kind::elu:
      case activation_kind::selu: return 0.0;
      default: return std::nullopt;
    }
  }

  double operator()(double x) const noexcept {
    switch (kind_) {
      case activation_kind::identity: return x;
      case activation_kind::sigmoid: return logistic(x);
      case activation_kind::tanh: return std::tanh(x);
      case activation_kind::relu: return x > 0.0 ? x : 0.0;
      case activation_kind::leaky_relu: return x > 0.0 ? x : parameter_ * x;
      case activation_kind::elu: return x > 0.0 ? x : parameter_ * std::expm1(x);
      case activation_kind::selu: return selu_lambda * (x > 0.0 ? x : selu_alpha * std::expm1(x));
      case activation_kind::gelu: return 0.5 * x * std::erfc(-x / sqrt2);
      case activation_kind::silu: return x * logistic(x);
    }
    return x;
  }

  // phi'(x); at a kink, the derivative from the right.
  double derivative(double x) const noexcept {
    switch (kind_) {
      case activation_kind::identity: return 1.0;
      case activation_kind::sigmoid: {
        const double s = logistic(x);
        return s * (1.0 - s);
      }
      case activation_kind::tanh: {
        const double t = std::tanh(x);
        return 1.0 - t * t;
      }
      case activation_kind::relu: return x >= 0.0 ? 1.0 : 0.0;
      case activation_kind::leaky_relu: return x >= 0.0 ? 1.0 : parameter_;
      case activation_kind::elu: return x >= 0.0 ? 1.0 : parameter_ * std::exp(x);
      case activation_kind::selu: return selu_lambda * (x >= 0.0 ? 1.0 : selu_alpha * std::exp(x));
      case activation_kind::gelu:
        return 0.5 * std::erfc(-x / sqrt2) + x * std::exp(-0.5 * x * x) / sqrt_two_pi;
      case activation_kind::silu: {
        const double s = logistic(x);
        return s * (1.0 + x * (1.0 - s));
      }
    }
    return 1.0;
  }

 private:
  activation(activation_kind kind, double parameter) noexcept : kind_(kind), parameter_(parameter) {}

  static constexpr double sqrt2 = 1.41421356237309504880;
  static constexpr double sqrt_two_pi = 2.50662827463100050242;

  static double logistic(double x) noexcept {
    // Written so that exp never overflows.
    if (x >= 0.0) return 1.0 / (1.0 + std::exp(-x));
    const double e = std::exp(x);
    return e / (1.0 + e);
  }

  activation_kind kind_;
  double parameter_;
};

// ---- expectations under a normal distribution ------------------------------

inline constexpr std::size_t default_hermite_nodes = 100;

namespace detail {

inline void check_normal(double mean, double variance, const char* where) {
  if (!std::isfinite(mean)) {
    reject_argument<std::domain_error>(where, "mean", argument_text(mean), "a finite number");
  }
  if (!(std::isfinite(variance) && variance >= 0.0)) {
    reject_argument<std::domain_error>(where, "variance", argument_text(variance), "a finite number >= 0");
  }
}

// Half-width, in standard deviations, of the range the split rule integrates over:
// the normal mass outside +-13 is 1.2e-38, below double precision for any integrand
// growing at most polynomially.
inline constexpr double split_range = 13.0;
// Panels of width 1/2 standard deviation, each with a 20-point Gauss-Legendre rule.
inline constexpr double split_panel_width = 0.5;
inline constexpr std::size_t split_panel_nodes = 20;

template <class F>
double legendre_panels(F& f, const quadrature_rule& rule, double a, double b, double mean,
                       double sd) {
  // integral over z in [a, b] of f(mean + sd z) exp(-z^2/2) / sqrt(2 pi)
  constexpr double inv_sqrt_two_pi = 0.39894228040143267794;
  if (!(b > a)) return 0.0;
  const auto panels = static_cast<std::size_t>(std::ceil((b - a) / split_panel_width));
  const double width = (b - a) / static_cast<double>(panels);
  double total = 0.0;
  for (std::size_t p = 0; p < panels; ++p) {
    const double lo = a + width * static_cast<double>(p);
    const double centre = lo + 0.5 * width;
    const double half = 0.5 * width;
    double sum = 0.0;
    for (std::size_t i = 0; i < rule.nodes.size(); ++i) {
      const double z = centre + half * rule.nodes[i];
      sum += rule.weights[i] * static_cast<double>(f(mean + sd * z)) * std::exp(-0.5 * z * z);
    }
    total += half * sum;
  }
  return total * inv_sqrt_two_pi;
}

}  // namespace detail

// A reusable Gauss-Hermite rule: expectation(f, m, v) ~ E[f(m + sqrt(v) z)], z ~ N(0,1).
// Exact for polynomials of degree < 2 nodes; for smooth (analytic) f the error falls
// quickly with the node count, for f with a kink only slowly -- use
// gaussian_expectation_split there.
class gaussian_quadrature {
 public:
  explicit gaussian_quadrature(std::size_t nodes = default_hermite_nodes)
      : rule_(detail::gauss_hermite_rule(nodes)) {}

  std::size_t nodes() const noexcept { return rule_.nodes.size(); }
  // Probability weights: they sum to 1.
  const std::vector<double>& weights() const noexcept { return rule_.weights; }

  template <class F>
  double expectation(F&& f, double mean = 0.0, double variance = 1.0) const {
    detail::check_normal(mean, variance, "kindling::gaussian_quadrature::expectation");
    if (variance == 0.0) return static_cast<double>(f(mean));  // the weights sum to 1 only to rounding
    const double sd = std::sqrt(variance);
    double sum = 0.0;
    for (std::size_t i = 0; i < rule_.nodes.size(); ++i) {
      sum += rule_.weights[i] * static_cast<double>(f(mean + sd * rule_.nodes[i]));
    }
    return sum;
  }

 private:
  detail::quadrature_rule rule_;
};

// E[f(x)] for x ~ N(mean, variance) by an n-node Gauss-Hermite rule (n in 1..200).
// Good for smooth f and moderate variance: E[tanh(x)^2] is off by 6e-12 at variance 1
// (100 nodes) but by 8e-4 at variance 25 (200 nodes), where f's poles come close to the
// real axis in the scaled variable.  gaussian_expectation_split is accurate to ~1e-15 in
// both cases and is the better choice for propagation at large variance.
template <class F>
double gaussian_expectation(F&& f, double mean = 0.0, double variance = 1.0,
                            std::size_t nodes = default_hermite_nodes) {
  detail::check_normal(mean, variance, "kindling::gaussian_expectation");
  return gaussian_quadrature(nodes).expectation(std::forward<F>(f), mean, variance);
}

// E[f(x)] for x ~ N(mean, variance) when f is smooth on each side of `split_at` but
// not across it (ReLU and its relatives at 0).  The range mean +- 13 sd is cut at
// split_at and covered by panels of half a standard deviation, each with a 20-point
// Gauss-Legendre rule, so no rule straddles the kink (960 evaluations of f).  Accuracy
// for the activations here: about 1e-15 relative, also for tanh at variance 25 (see
// tests/gain.cpp).
template <class F>
double gaussian_expectation_split(F&& f, double split_at, double mean = 0.0,
                                  double variance = 1.0) {
  constexpr const char* where = "kindling::gaussian_expectation_split";
  detail::check_normal(mean, variance, where);
  if (!std::isfinite(split_at)) {
    detail::reject_argument<std::domain_error>(where, "split_at", detail::argument_text(split_at), "a finite number");
  }
  if (variance == 0.0) return static_cast<double>(f(mean));
  const double sd = std::sqrt(variance);
  const double r = detail::split_range;
  const double cut = std::fmin(r, std::fmax(-r, (split_at - mean) / sd));
  const detail::quadrature_rule rule = detail::gauss_legendre_rule(detail::split_panel_nodes);
  return detail::legendre_panels(f, rule, -r, cut, mean, sd) +
         detail::legendre_panels(f, rule, cut, r, mean, sd);
}

// How to integrate a user's callable: Gauss-Hermite with `nodes` nodes, or, when
// `kink` is set, the split rule cut at that point.
struct quadrature_options {
  std::size_t nodes = default_hermite_nodes;
  std::optional<double> kink;
};

namespace detail {

template <class F>
double standard_expectation(F&& f, const quadrature_options& options) {
  if (options.kink) return gaussian_expectation_split(std::forward<F>(f), *options.kink);
  return gaussian_expectation(std::forward<F>(f), 0.0, 1.0, options.nodes);
}

inline double gain_from_second_moment(double moment, const char* where, const char* what) {
  if (!(std::isfinite(moment) && moment > 0.0)) {
    throw std::domain_error(std::string(where) + ": " + what + " = " + std::to_string(moment) +
                            ", expected a finite positive value (the activation is zero or "
                            "not finite under N(0, 1))");
  }
  return 1.0 / std::sqrt(moment);
}

template <class F>
using not_activation = std::enable_if_t<!std::is_same_v<std::decay_t<F>, activation>, int>;

}  // namespace detail

namespace detail {

// 1 / sqrt(E[f(z)^2]) for z ~ N(0, 1).
template <class F>
double inverse_root_second_moment(F& f, const quadrature_options& options, const char* where,
                                  const char* what) {
  const double m = standard_expectation(
      [&f](double x) {
        const double y = static_cast<double>(f(x));
        return y * y;
      },
      options);
  return gain_from_second_moment(m, where, what);
}

}  // namespace detail

// Forward gain of any callable phi: 1 / sqrt(E[phi(z)^2]), z ~ N(0, 1).
// Accuracy with the default options (100 Gauss-Hermite nodes): tanh 7e-12 relative;
// a kink converges slowly (E[relu(z)] is off by 2e-3) -- set options.kink for those.
template <class F, detail::not_activation<F> = 0>
double forward_gain(F&& phi, const quadrature_options& options = {}) {
  return detail::inverse_root_second_moment(phi, options, "kindling::forward_gain",
                                            "E[phi(z)^2]");
}

// Backward gain from a derivative phi': 1 / sqrt(E[phi'(z)^2]).  Without an analytic
// derivative, pass central_difference(phi).
template <class D, detail::not_activation<D> = 0>
double backward_gain(D&& derivative, const quadrature_options& options = {}) {
  return detail::inverse_root_second_moment(derivative, options, "kindling::backward_gain",
                                            "E[phi'(z)^2]");
}

// The derivative of phi by central differences, (phi(x+h) - phi(x-h)) / (2h) with
// h = cbrt(eps) max(1, |x|) ~ 6e-6 max(1, |x|): truncation O(h^2 phi''') and rounding
// O(eps/h) are balanced, about 1e-10 relative for smooth phi.  Within h of a kink it
// averages the two sides, so give the kink to the quadrature (no split-rule node lies
// that close to the cut).
template <class F>
auto central_difference(F phi) {
  return [phi](double x) {
    const double h = std::cbrt(std::numeric_limits<double>::epsilon()) * std::fmax(1.0, std::fabs(x));
    return (static_cast<double>(phi(x + h)) - static_cast<double>(phi(x - h))) / (2.0 * h);
  };
}

// Computed gains of the built-in activations with their analytic derivative, always by
// the split rule (cut at the kink, or at 0 for the smooth ones, where it costs nothing):
// it is accurate to about 1e-15 for all of them, where 100 Gauss-Hermite nodes give
// 7e-12 for tanh.
inline double forward_gain(const activation& a) {
  return forward_gain([&a](double x) { return a(x); },
                      quadrature_options{default_hermite_nodes, a.kink().value_or(0.0)});
}
inline double backward_gain(const activation& a) {
  return backward_gain([&a](double x) { return a.derivative(x); },
                       quadrature_options{default_hermite_nodes, a.kink().value_or(0.0)});
}

// A table gain and where it comes from.  `computed` marks values obtained by
// quadrature rather than taken from a publication.
struct gain_entry {
  double value = 1.0;
  std::string_view source;
  bool computed = false;
};

// The gain a scheme uses for `a` unless told otherwise.
//
// SELU: we use 1.  Klambauer et al. (2017) pair SELU with Var W = 1/fan_in (LeCun) and
// prove the fixed point (mean 0, variance 1) for it, i.e. gain 1; a table value of 3/4
// is also in use in some tools (common practice, from memory) and is not what the
// paper prescribes.
//
// ELU (alpha = 1), GELU and SiLU have no published gain: their entries are the forward
// gain 1/sqrt(E[phi(z)^2]) computed once with scipy.integrate.quad (this machine) and
// stored, so that the value does not depend on the libm the library runs on; the tests
// recompute them with forward_gain.  ELU with another alpha is computed on the call.
inline gain_entry table_gain(const activation& a) {
  switch (a.kind()) {
    case activation_kind::identity:
      return {1.0, "identity: variance preserved, LeCun et al., Efficient BackProp (1998)", false};
    case activation_kind::sigmoid:
      return {1.0, "common practice (no published derivation)", false};
    case activation_kind::tanh:
      return {5.0 / 3.0, "common practice, no published source", false};
    case activation_kind::relu:
      return {std::sqrt(2.0), "He et al., ICCV 2015: E[relu(z)^2] = 1/2", false};
    case activation_kind::leaky_relu:
      // fma so that the value does not depend on floating-point contraction
      return {std::sqrt(2.0 / std::fma(a.parameter(), a.parameter(), 1.0)),
              "He et al., ICCV 2015, eq. 14: sqrt(2 / (1 + a^2))", false};
    case activation_kind::selu:
      return {1.0, "Klambauer et al., NeurIPS 2017: fixed point (0, 1) with Var W = 1/fan_in",
              false};
    case activation_kind::elu:
      if (a.parameter() == 1.0) {
        return {1.2451983007007064,
                "computed: 1/sqrt(E[elu(z)^2]), scipy.integrate.quad, stored", true};
      }
      return {forward_gain(a), "computed: 1/sqrt(E[elu(z)^2]), Gauss-Legendre split at 0", true};
    case activation_kind::gelu:
      return {1.5335304411955353, "computed: 1/sqrt(E[gelu(z)^2]), scipy.integrate.quad, stored",
              true};
    case activation_kind::silu:
      return {1.6765324703310909, "computed: 1/sqrt(E[silu(z)^2]), scipy.integrate.quad, stored",
              true};
  }
  return {1.0, "unknown", false};
}

}  // namespace kindling

#endif  // KINDLING_GAIN_HPP
