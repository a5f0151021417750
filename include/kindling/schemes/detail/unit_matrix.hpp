// kindling/schemes/detail/unit_matrix.hpp: a weight seen as a matrix of units by
// incoming connections, for the structured schemes (orthogonal, identity, sparse).
//
// The unit axis is the output-channel axis of the layout (for a transposed convolution,
// its out/groups axis). The matrix has one row per index of that axis and one column per
// combination of the other axes, taken in row-major order. Row o, column j is the
// element whose multi-index has o on the unit axis and j's digits on the others.
#ifndef KINDLING_SCHEMES_DETAIL_UNIT_MATRIX_HPP
#define KINDLING_SCHEMES_DETAIL_UNIT_MATRIX_HPP

#include <cstddef>
#include <cstdint>

#include "../../fan.hpp"
#include "../../view.hpp"

namespace kindling::detail {

inline std::size_t unit_axis(weight_layout layout, std::size_t rank) noexcept {
  switch (layout) {
    case weight_layout::out_in:
    case weight_layout::out_in_spatial:
    case weight_layout::out_spatial_in: return 0;
    case weight_layout::in_out: return rank - 1;
    case weight_layout::spatial_in_out: return rank - 1;
    case weight_layout::in_out_spatial: return 1;
    case weight_layout::spatial_out_in: return rank - 2;
  }
  return 0;
}

struct unit_matrix {
  std::uint64_t rows = 0;   // units (the unit axis' extent)
  std::uint64_t cols = 0;   // incoming connections per unit
  std::uint64_t inner = 1;  // product of the axes after the unit axis

  unit_matrix(const shape& global, weight_layout layout) {
    const std::size_t axis = unit_axis(layout, global.rank());
    rows = global[axis];
    std::uint64_t outer = 1;
    for (std::size_t d = 0; d < axis; ++d) outer *= global[d];
    for (std::size_t d = axis + 1; d < global.rank(); ++d) inner *= global[d];
    cols = outer * inner;
  }

  /// Row-major flat index in the global shape of matrix element (row, col).
  std::uint64_t flat(std::uint64_t row, std::uint64_t col) const noexcept {
    const std::uint64_t a = col / inner;
    const std::uint64_t b = col % inner;
    return (a * rows + row) * inner + b;
  }
  /// The matrix element that global flat index i is.
  void locate(std::uint64_t i, std::uint64_t* row, std::uint64_t* col) const noexcept {
    const std::uint64_t b = i % inner;
    const std::uint64_t rest = i / inner;
    *row = rest % rows;
    *col = (rest / rows) * inner + b;
  }
};

/// The matrix elements of flat indices first, first + 1, ... in turn: locate() once, then
/// a carry per step instead of two divisions per element (the writers' hot loop).
class unit_walk {
 public:
  unit_walk(const unit_matrix& m, std::uint64_t first) noexcept : m_(m) {
    b_ = first % m.inner;
    const std::uint64_t rest = first / m.inner;
    row_ = rest % m.rows;
    a_ = rest / m.rows;
  }
  std::uint64_t row() const noexcept { return row_; }
  std::uint64_t col() const noexcept { return a_ * m_.inner + b_; }
  void next() noexcept {
    if (++b_ < m_.inner) return;
    b_ = 0;
    if (++row_ < m_.rows) return;
    row_ = 0;
    ++a_;
  }

 private:
  const unit_matrix& m_;
  std::uint64_t a_ = 0, row_ = 0, b_ = 0;  // col = a inner + b
};

}  // namespace kindling::detail

#endif  // KINDLING_SCHEMES_DETAIL_UNIT_MATRIX_HPP
