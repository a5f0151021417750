// kindling/schemes/sparse.hpp: sparse initialization (Martens, ICML 2010): each unit
// gets exactly k nonzero incoming weights, the rest are zero. The paper uses k = 15
// and unit-Gaussian values (from memory); both are arguments here.
//
// Positions: for unit (row) o of the unit matrix (schemes/detail/unit_matrix.hpp), k
// distinct columns out of n are chosen by Floyd's algorithm (Bentley & Floyd, CACM
// 1987): for t = 0 .. k-1, with j = n - k + t, draw r uniform in [0, j]; take r unless
// it is already taken, else take j. The draw for step t of unit o uses the 64-bit word
// (w0 << 32 | w1) of block o * k + t of domain `positions`, reduced to [0, j] by the
// multiply-high method (bias below (j + 1) / 2^64). Values: the element at global index
// i, when chosen, is the normal value of element i in domain `values` (so a shard
// draws exactly the values of the whole).
#ifndef KINDLING_SCHEMES_SPARSE_HPP
#define KINDLING_SCHEMES_SPARSE_HPP

#include <algorithm>
#include <cstdint>
#include <string>
#include <vector>

#include "../random/sample.hpp"
#include "detail/unit_matrix.hpp"
#include "scheme.hpp"

namespace kindling {

namespace detail {

// r uniform in [0, bound] from 64 random bits: the high word of bits * (bound + 1),
// from 32-bit halves (portable, no 128-bit type).
inline std::uint64_t draw_below_or_equal(std::uint64_t bits, std::uint64_t bound) noexcept {
  const std::uint64_t span = bound + 1;  // bound < 2^63 here, no wrap
  const std::uint64_t a = bits >> 32, b = bits & 0xffffffffu, c = span >> 32, d = span & 0xffffffffu;
  const std::uint64_t ad = a * d, bc = b * c, bd = b * d;
  const std::uint64_t mid = (bd >> 32) + (ad & 0xffffffffu) + (bc & 0xffffffffu);
  return a * c + (ad >> 32) + (bc >> 32) + (mid >> 32);
}

// The k chosen columns of unit `row`, sorted.
inline std::vector<std::uint64_t> sparse_columns(const stream& s, std::uint64_t row, std::uint64_t k,
                                                 std::uint64_t n) {
  std::vector<std::uint64_t> taken;
  taken.reserve(static_cast<std::size_t>(k));
  for (std::uint64_t t = 0; t < k; ++t) {
    const std::uint64_t j = n - k + t;
    const auto w = s.block(domain::positions, row * k + t);
    const std::uint64_t bits = (static_cast<std::uint64_t>(w[0]) << 32) | w[1];
    const std::uint64_t r = draw_below_or_equal(bits, j);
    const auto at = std::lower_bound(taken.begin(), taken.end(), r);
    if (at != taken.end() && *at == r) {
      taken.insert(std::lower_bound(taken.begin(), taken.end(), j), j);
    } else {
      taken.insert(at, r);
    }
  }
  return taken;
}

}  // namespace detail

struct sparse {
  std::uint64_t nonzero = 15;  // k, incoming weights per unit (Martens 2010)
  double stddev = 1;           // of the nonzero values

  std::string name() const { return "sparse"; }
  void check(const shape& global, const weight_info& w) const {
    detail::require_positive_argument(stddev, "sparse", "stddev");
    if (global.rank() < 2) {
      throw std::invalid_argument("kindling::sparse: argument 'shape' = " + global.text() +
                                  " has rank " + std::to_string(global.rank()) +
                                  ", expected a weight of rank >= 2 (units by incoming weights)");
    }
    const detail::unit_matrix m(global, w.layout);
    if (nonzero == 0 || nonzero > m.cols) {
      throw std::invalid_argument("kindling::sparse: argument 'nonzero' = " + std::to_string(nonzero) +
                                  ", expected 1 to " + std::to_string(m.cols) +
                                  " (the incoming weights of each unit)");
    }
  }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    const detail::unit_matrix m(v.global_shape(), w.layout);
    // The chosen columns of the units this view's region holds (a shard draws only its
    // own; a unit's columns depend on the unit alone, so they are the same either way).
    const std::size_t axis = detail::unit_axis(w.layout, v.global_shape().rank());
    const std::uint64_t first_unit = v.part().offset()[axis];
    std::vector<std::vector<std::uint64_t>> columns(static_cast<std::size_t>(v.part().extent()[axis]));
    for (std::size_t k = 0; k < columns.size(); ++k) {
      columns[k] = detail::sparse_columns(s, first_unit + k, nonzero, m.cols);
    }
    const dist::normal values{0.0, stddev};
    using compute = compute_type_t<E>;
    const auto kernel = detail::prepare<compute>(values);  // once, not per buffer
    const auto gen = [&](std::uint64_t first, std::size_t n, compute* out) {
      detail::generate_run(kernel, s, domain::values, first, n, out);
      detail::unit_walk at(m, first);
      for (std::size_t q = 0; q < n; ++q, at.next()) {
        const auto& c = columns[static_cast<std::size_t>(at.row() - first_unit)];
        if (!std::binary_search(c.begin(), c.end(), at.col())) out[q] = compute(0);
      }
    };
    fill_generated(v, bounds_of(values), gen, std::forward<Exec>(exec));
  }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_SPARSE_HPP
