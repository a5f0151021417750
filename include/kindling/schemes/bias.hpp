// kindling/schemes/bias.hpp: rules for bias vectors.
//
// Biases start at zero (common practice): the weights already break the symmetry
// between units. The other rules set a bias so that a unit starts where it should:
//   sigmoid_target_bias: a sigmoid unit whose mean activation should start at p (for
//     units that should start mostly off, p small): b = logit(p) = log(p / (1 - p)).
//   rare_class_bias: the output bias of a class of prior π, so that the first losses are
//     not swamped by the common class: b = -log((1 - π) / π) (Lin et al., ICCV 2017).
//   forget_gate_bias: the forget block of a packed LSTM bias at 1, the other blocks at 0
//     (Gers, Schmidhuber & Cummins 2000; Jozefowicz et al., ICML 2015).
// Every rule is also a scheme (scheme.hpp), so it can be used with initialize().
#ifndef KINDLING_SCHEMES_BIAS_HPP
#define KINDLING_SCHEMES_BIAS_HPP

#include <cstdint>
#include <limits>
#include <string>

#include "../detail/dmath.hpp"
#include "constant.hpp"

namespace kindling {

namespace detail {
inline void require_vector(const shape& global, const char* rule) {
  if (global.rank() != 1) {
    reject_argument<std::invalid_argument>(rule, "shape", global.text(),
                                           "a bias vector (rank 1, or for initialize_bias one row or one "
                                           "column, such as an Eigen vector)");
  }
}

// A rank-2 view with one column or one row (an Eigen vector, which view_of gives as
// n x 1 or 1 x n, like Eigen itself) as the rank-1 vector of its length: the same memory
// and region, and the same values, since an axis of extent 1 leaves every row-major flat
// index as it is. Any other view is returned as it is (and refused by require_vector).
template <class E>
strided_view<E> as_bias_vector(const strided_view<E>& v) {
  const shape& g = v.global_shape();
  if (g.rank() != 2 || (g[0] != 1 && g[1] != 1)) return v;
  const std::size_t axis = g[0] == 1 ? 1 : 0;
  const region part(shape{v.part().offset()[axis]}, shape{v.part().extent()[axis]});
  return strided_view<E>(v.data(), shape{g[axis]}, part, strides{v.stride(axis)});
}
inline void require_probability(double p, const char* rule, const char* argument) {
  if (!std::isfinite(p) || !(p > 0) || !(p < 1)) {
    reject_argument<std::domain_error>(rule, argument, argument_text(p), "a probability strictly between 0 and 1");
  }
}
// log(p / (1 - p)) with the library's own log, so the bias has the same bits everywhere.
inline double logit(double p) { return detail::log(p) - detail::log(1.0 - p); }

// Shared body of the rules that set every element to one computed value.
template <class Self>
struct constant_bias {
  void check(const shape& g, const weight_info& w) const {
    require_vector(g, Self::rule);
    constant{self().value()}.check(g, w);
  }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    constant{self().value()}.write(v, w, s, std::forward<Exec>(exec));
  }
  const Self& self() const { return static_cast<const Self&>(*this); }
};
}  // namespace detail

/// b = logit(target): a sigmoid unit starts with mean activation `target`.
struct sigmoid_target_bias : detail::constant_bias<sigmoid_target_bias> {
  double target = 0.5;
  sigmoid_target_bias() = default;
  explicit sigmoid_target_bias(double p) : target(p) {}
  std::string name() const { return "sigmoid-target-bias"; }
  double value() const {
    detail::require_probability(target, "sigmoid_target_bias", "target");
    return detail::logit(target);
  }
  static constexpr const char* rule = "sigmoid_target_bias";
};

/// b = -log((1 - prior) / prior) (Lin et al., ICCV 2017, sec. 4.1).
struct rare_class_bias : detail::constant_bias<rare_class_bias> {
  double prior = 0.01;
  rare_class_bias() = default;
  explicit rare_class_bias(double p) : prior(p) {}
  std::string name() const { return "rare-class-bias"; }
  double value() const {
    detail::require_probability(prior, "rare_class_bias", "prior");
    return -(detail::log(1.0 - prior) - detail::log(prior));
  }
  static constexpr const char* rule = "rare_class_bias";
};

/// A packed LSTM bias of `blocks` equal blocks: block `forget_block` is `value`, the
/// rest 0. Gate order differs between code bases; the forget block's index is an
/// argument (default 1: input, forget, cell, output).
struct forget_gate_bias {
  std::uint64_t blocks = 4;
  std::uint64_t forget_block = 1;
  double value = 1;

  std::string name() const { return "forget-gate-bias"; }
  void check(const shape& g, const weight_info&) const {
    detail::require_vector(g, "forget_gate_bias");
    detail::require_finite_argument(value, "forget_gate_bias", "value");
    if (blocks == 0 || g[0] % blocks != 0) {
      detail::reject_argument<std::invalid_argument>("kindling::forget_gate_bias", "blocks", std::to_string(blocks),
                                                     "a divisor >= 1 of the bias length " + std::to_string(g[0]));
    }
    if (forget_block >= blocks) {
      detail::reject_argument<std::invalid_argument>("kindling::forget_gate_bias", "forget_block",
                                                     std::to_string(forget_block),
                                                     "a block index below " + std::to_string(blocks));
    }
  }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info&, const stream&, Exec&& exec) const {
    using compute = compute_type_t<E>;
    const std::uint64_t width = v.global_shape()[0] / blocks;
    const std::uint64_t lo = forget_block * width, hi = lo + width;
    const auto c = static_cast<compute>(value);
    const auto gen = [=](std::uint64_t first, std::size_t n, compute* out) {
      for (std::size_t k = 0; k < n; ++k) {
        const std::uint64_t i = first + k;
        out[k] = (i >= lo && i < hi) ? c : compute(0);
      }
    };
    const double inf = std::numeric_limits<double>::infinity();
    fill_generated(v, element_bounds{-inf, inf, false, false}, gen, std::forward<Exec>(exec));
  }
};

/// Sets a bias vector by one of the rules above (or zeros, constant). No stream is
/// needed: bias rules draw nothing.
/// The view may also be n x 1 or 1 x n (an Eigen vector or a column or row of a matrix,
/// given as such or through view_of): it is then the vector of its n elements, with the
/// values a rank-1 view of length n gets.
template <class E, class Rule, class Exec = serial_executor>
void initialize_bias(const strided_view<E>& v, const Rule& rule, Exec&& exec = Exec{}) {
  static_assert(detail::writes_into<E, Exec>());
  const weight_info none{fans{1, 1, 1}, weight_layout::out_in};
  const strided_view<E> b = detail::as_bias_vector(v);
  detail::require_vector(b.global_shape(), "initialize_bias");
  rule.check(b.global_shape(), none);
  rule.write(b, none, stream::root(0), std::forward<Exec>(exec));
}

/// initialize_bias() of an object the adapter headers take, e.g. an Eigen::VectorXf, a
/// RowVectorXd, a segment, a Map or Ref of a vector: the same as
/// initialize_bias(view_of(x), ...).
template <class X, class Rule, class Exec = serial_executor, class = adapted_view_t<X>>
void initialize_bias(X&& x, const Rule& rule, Exec&& exec = Exec{}) {
  initialize_bias(adapted_view(x), rule, std::forward<Exec>(exec));
}

}  // namespace kindling

#endif  // KINDLING_SCHEMES_BIAS_HPP
