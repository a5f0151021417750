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
//
// Memory and time follow the region, not the tensor: only the units the region holds
// are drawn (k counter blocks each), one unit at a time, and each keeps only its chosen
// columns between the region's first and last column. While a unit is drawn, the
// columns taken so far are a sorted list when k <= 64 and otherwise one bit per
// incoming weight (fan-in / 8 bytes), so a large k costs O(k), never O(k^2).
#ifndef KINDLING_SCHEMES_SPARSE_HPP
#define KINDLING_SCHEMES_SPARSE_HPP

#include <algorithm>
#include <cstdint>
#include <iterator>
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

// The columns Floyd's algorithm has taken so far for one unit: a sorted list for a
// small k, a bitmap of the n columns for a large one (reused from unit to unit).
class taken_columns {
 public:
  taken_columns(std::uint64_t k, std::uint64_t n) : listed_(k <= 64) {
    if (listed_) list_.reserve(static_cast<std::size_t>(k));
    else bits_.resize(static_cast<std::size_t>(n / 64 + 1));
  }
  void clear() {
    list_.clear();
    std::fill(bits_.begin(), bits_.end(), std::uint64_t{0});
  }
  bool has(std::uint64_t c) const {
    if (listed_) return std::binary_search(list_.begin(), list_.end(), c);
    return (bits_[static_cast<std::size_t>(c / 64)] >> (c % 64)) & 1u;
  }
  void add(std::uint64_t c) {
    if (listed_) list_.insert(std::lower_bound(list_.begin(), list_.end(), c), c);
    else bits_[static_cast<std::size_t>(c / 64)] |= std::uint64_t{1} << (c % 64);
  }
  // The taken columns in [lo, hi], in increasing order, appended to out.
  void copy_range(std::uint64_t lo, std::uint64_t hi, std::vector<std::uint64_t>& out) const {
    if (listed_) {
      std::copy(std::lower_bound(list_.begin(), list_.end(), lo), std::upper_bound(list_.begin(), list_.end(), hi),
                std::back_inserter(out));
      return;
    }
    for (std::uint64_t c = lo; c <= hi; ++c) {
      if (c % 64 == 0 && bits_[static_cast<std::size_t>(c / 64)] == 0 && hi - c >= 63) {
        c += 63;  // an empty word
        continue;
      }
      if (has(c)) out.push_back(c);
    }
  }

 private:
  bool listed_;
  std::vector<std::uint64_t> list_;
  std::vector<std::uint64_t> bits_;
};

// Draws the k chosen columns of unit `row` out of n into `taken` (cleared first).
inline void draw_sparse_columns(const stream& s, std::uint64_t row, std::uint64_t k, std::uint64_t n,
                                taken_columns& taken) {
  taken.clear();
  for (std::uint64_t t = 0; t < k; ++t) {
    const std::uint64_t j = n - k + t;
    const auto w = s.block(domain::positions, row * k + t);
    const std::uint64_t bits = (static_cast<std::uint64_t>(w[0]) << 32) | w[1];
    const std::uint64_t r = draw_below_or_equal(bits, j);
    taken.add(taken.has(r) ? j : r);  // j itself is never taken before step t
  }
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
    // The region's columns lie between those of its first and last elements (a column
    // is a row-major index over the non-unit axes, so it grows with each of them).
    std::uint64_t first_flat = 0, last_flat = 0, unit = 0, lo = 0, hi = 0;
    for (std::size_t d = 0; d < v.rank(); ++d) {
      first_flat = first_flat * v.global_shape()[d] + v.part().offset()[d];
      last_flat = last_flat * v.global_shape()[d] + v.part().offset()[d] + v.part().extent()[d] - 1;
    }
    m.locate(first_flat, &unit, &lo);
    m.locate(last_flat, &unit, &hi);
    std::vector<std::vector<std::uint64_t>> columns(static_cast<std::size_t>(v.part().extent()[axis]));
    detail::taken_columns taken(nonzero, m.cols);
    for (std::size_t k = 0; k < columns.size(); ++k) {
      detail::draw_sparse_columns(s, first_unit + k, nonzero, m.cols, taken);
      taken.copy_range(lo, hi, columns[k]);
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
