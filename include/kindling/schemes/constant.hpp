// kindling/schemes/constant.hpp: zeros and constant weights.
//
// Every unit of a constant weight computes the same function and gets the same
// gradient, so the units never become different (common practice). Use these for
// biases and for the weights that should start at zero (Fixup's last layer of a
// residual branch), not for the weights of hidden units; the audits flag them there.
#ifndef KINDLING_SCHEMES_CONSTANT_HPP
#define KINDLING_SCHEMES_CONSTANT_HPP

#include <cstdint>
#include <limits>
#include <string>

#include "scheme.hpp"

namespace kindling {

/// Every element is `value`, rounded to the element type.
struct constant {
  double value = 0;

  std::string name() const { return "constant"; }
  void check(const shape&, const weight_info&) const {
    detail::require_finite_argument(value, "constant", "value");
  }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info&, const stream&, Exec&& exec) const {
    using compute = compute_type_t<E>;
    const auto c = static_cast<compute>(value);
    const auto gen = [c](std::uint64_t, std::size_t n, compute* out) {
      for (std::size_t k = 0; k < n; ++k) out[k] = c;
    };
    const double inf = std::numeric_limits<double>::infinity();
    fill_generated(v, element_bounds{-inf, inf, false, false}, gen, std::forward<Exec>(exec));
  }
};

/// Every element is zero.
struct zeros {
  std::string name() const { return "zeros"; }
  void check(const shape&, const weight_info&) const {}
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    constant{0.0}.write(v, w, s, std::forward<Exec>(exec));
  }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_CONSTANT_HPP
