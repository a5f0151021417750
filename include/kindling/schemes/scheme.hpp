// kindling/schemes/scheme.hpp: what every scheme is, and initialize(), which applies a
// scheme to a weight described by its layer.
//
// A scheme is a small value type with
//   std::string name() const;                                     // e.g. "glorot-uniform"
//   void check(const shape& global, const weight_info& w) const;  // throws on bad input
//   template <class E, class Exec>
//   void write(const strided_view<E>& v, const weight_info& w,
//              const stream& s, Exec&& exec) const;               // after check() passed
// write() draws only through the fill engine (fill.hpp) or from counter blocks of s,
// so every scheme keeps the reproducibility contract: the values depend on the seed,
// the parameter's name, the scheme and its arguments, the full logical shape and the
// element type, and on nothing else.
#ifndef KINDLING_SCHEMES_SCHEME_HPP
#define KINDLING_SCHEMES_SCHEME_HPP

#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "../detail/error.hpp"
#include "../fan.hpp"
#include "../fill.hpp"
#include "../random/stream.hpp"
#include "../view.hpp"

namespace kindling {

/// What a scheme needs to know of the weight it fills, besides its shape: the fans
/// and how the axes are laid out (structured schemes find the output units by it).
struct weight_info {
  kindling::fans fans;
  weight_layout layout = weight_layout::out_in;
};

namespace detail {

inline std::vector<std::uint64_t> shape_vector(const shape& s) {
  return std::vector<std::uint64_t>(s.begin(), s.end());
}

// Arguments of schemes, in the core's message style (detail/error.hpp).
inline void require_finite_argument(double value, const char* scheme, const char* argument) {
  if (!std::isfinite(value))
    reject_argument<std::domain_error>(scheme, argument, argument_text(value), "a finite number");
}
inline void require_positive_argument(double value, const char* scheme, const char* argument) {
  if (!std::isfinite(value) || !(value > 0))
    reject_argument<std::domain_error>(scheme, argument, argument_text(value), "a finite number > 0");
}
inline void require_fans(const fans& f, const char* scheme) {
  if (f.fan_in == 0 || f.fan_out == 0) {
    reject_argument<std::invalid_argument>(
        scheme, "fans",
        "(fan_in " + std::to_string(f.fan_in) + ", fan_out " + std::to_string(f.fan_out) + ")",
        "both >= 1");
  }
}

template <class L, class = void>
struct has_layout : std::false_type {};
template <class L>
struct has_layout<L, std::void_t<decltype(std::declval<const L&>().layout())>> : std::true_type {};

template <class L, class = void>
struct is_packed : std::false_type {};
template <class L>
struct is_packed<L, std::void_t<decltype(std::declval<const L&>().all_blocks())>> : std::true_type {};

// Schemes whose values follow one element-wise distribution for given fans (the
// fan-scaled family, fixed, constant) have distribution(fans); structured schemes
// (orthogonal, delta_orthogonal, identity, sparse) do not, and are audited by their
// structure instead (audit/structure.hpp).
template <class S, class = void>
struct has_distribution : std::false_type {};
template <class S>
struct has_distribution<S, std::void_t<decltype(std::declval<const S&>().distribution(std::declval<const fans&>()))>>
    : std::true_type {};

template <class L>
weight_layout layout_of(const L& layer) {
  if constexpr (has_layout<L>::value) {
    return layer.layout();
  } else {
    return weight_layout::out_in;  // embeddings: [vocabulary, dimension]
  }
}

// The part of view v that falls in block `b` of a packed weight, as a view of the
// block's own global shape.
template <class E>
bool block_part(const strided_view<E>& v, const packed_block& b, strided_view<E>* out) {
  const region& part = v.part();
  const std::uint64_t lo = std::max(part.offset()[b.axis], b.offset);
  const std::uint64_t hi = std::min(part.offset()[b.axis] + part.extent()[b.axis],
                                    b.offset + b.shape[b.axis]);
  if (lo >= hi) return false;
  std::vector<std::uint64_t> at(part.offset().begin(), part.offset().end());
  std::vector<std::uint64_t> n(part.extent().begin(), part.extent().end());
  at[b.axis] = lo;
  n[b.axis] = hi - lo;
  const strided_view<E> inner = v.sub(region(shape(at.begin(), at.end()), shape(n.begin(), n.end())));
  std::vector<std::uint64_t> local = at;
  local[b.axis] = lo - b.offset;
  *out = inner.as_part_of(shape(b.shape.begin(), b.shape.end()), shape(local.begin(), local.end()));
  return true;
}

}  // namespace detail

/// The fans and layout of a layer's weight stored with global shape `global`, after
/// checking that `global` is the layer's weight shape (std::invalid_argument naming it
/// otherwise). Of a packed layer: the fans of one block (each block has its own stream).
/// This is how initialize(), the audits and the calibrations read a layer description.
template <class Layer>
weight_info weight_info_of(const Layer& layer, const shape& global) {
  layer.check_shape(detail::shape_vector(global));
  return weight_info{layer.layer_fans(), detail::layout_of(layer)};
}

/// The part of view v that falls in block b of a packed weight, as a view of the block's
/// own global shape (a weight of its own); false, and *out unchanged, if v holds none of it.
template <class E>
bool packed_block_view(const strided_view<E>& v, const packed_block& b, strided_view<E>* out) {
  return detail::block_part(v, b, out);
}

/// Fills view v, the weight of `layer` (or a region of it), with `scheme` drawn from
/// stream s. The view's global shape must be the layer's weight shape. For a packed
/// layer (LSTM, GRU, fused attention projections) each block is a weight of its own:
/// block b gets its own fans and the sub-stream s.indexed(b), so a packed weight equals
/// its blocks initialized separately. Everything is checked before anything is written.
template <class E, class Layer, class Scheme, class Exec = serial_executor>
void initialize(const strided_view<E>& v, const Layer& layer, const Scheme& scheme, const stream& s,
                Exec&& exec = Exec{}) {
  static_assert(detail::writes_into<E, Exec>());
  const weight_layout layout = weight_info_of(layer, v.global_shape()).layout;
  if constexpr (detail::is_packed<Layer>::value) {
    const std::vector<packed_block> blocks = layer.all_blocks();
    for (const packed_block& b : blocks) {
      scheme.check(shape(b.shape.begin(), b.shape.end()), weight_info{b.block_fans, layout});
    }
    for (const packed_block& b : blocks) {
      strided_view<E> part = v;
      if (detail::block_part(v, b, &part)) {
        scheme.write(part, weight_info{b.block_fans, layout}, s.indexed(b.index), exec);
      }
    }
  } else {
    const weight_info w{layer.layer_fans(), layout};
    scheme.check(v.global_shape(), w);
    scheme.write(v, w, s, std::forward<Exec>(exec));
  }
}

/// Fills view v with `scheme` for explicitly given fans and layout (for weights that
/// have no layer description, or whose fans the caller has worked out).
template <class E, class Scheme, class Exec = serial_executor>
void initialize(const strided_view<E>& v, const weight_info& w, const Scheme& scheme, const stream& s,
                Exec&& exec = Exec{}) {
  static_assert(detail::writes_into<E, Exec>());
  scheme.check(v.global_shape(), w);
  scheme.write(v, w, s, std::forward<Exec>(exec));
}

/// initialize() of an object the adapter headers take (an Eigen matrix, map or block, an
/// Eigen or xtensor tensor): the same as initialize(view_of(x), ...), like fill(x, ...).
/// `layer` is a layer description or a weight_info.
template <class X, class Layer, class Scheme, class Exec = serial_executor, class = adapted_view_t<X>>
void initialize(X&& x, const Layer& layer, const Scheme& scheme, const stream& s, Exec&& exec = Exec{}) {
  initialize(adapted_view(x), layer, scheme, s, std::forward<Exec>(exec));
}

}  // namespace kindling

#endif  // KINDLING_SCHEMES_SCHEME_HPP
