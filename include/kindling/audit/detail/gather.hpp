// kindling/audit/detail/gather.hpp: one pass over a view that copies its values, as
// doubles, into unit-major order (the unit matrix of schemes/detail/unit_matrix.hpp:
// row = output unit, column = incoming connection), and notes non-finite values.
// Every audit reads this copy, so each check is written once for every element type,
// storage order and stride.
#ifndef KINDLING_AUDIT_DETAIL_GATHER_HPP
#define KINDLING_AUDIT_DETAIL_GATHER_HPP

#include <cmath>
#include <cstdint>
#include <limits>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <vector>

#include "../../element.hpp"
#include "../../fan.hpp"
#include "../../schemes/detail/unit_matrix.hpp"
#include "../../view.hpp"

namespace kindling::detail {

struct gathered {
  std::uint64_t rows = 0;  // units (1 when the view is only a region of its tensor)
  std::uint64_t cols = 0;  // incoming connections per unit
  bool whole = true;       // false: the view holds a region, so units are not known
  std::vector<double> values;             // rows * cols, unit-major
  std::uint64_t non_finite = 0;           // NaN or infinite values
  std::uint64_t nan_count = 0;
  std::uint64_t first_non_finite = 0;     // its global row-major flat index
  double first_non_finite_value = 0;
};

template <class E>
gathered gather(const strided_view<E>& v, weight_layout layout) {
  using element = std::remove_const_t<E>;
  gathered g;
  const shape& global = v.global_shape();
  const region& part = v.part();
  const std::size_t r = v.rank();
  g.whole = v.is_whole();
  unit_matrix um(global, layout);
  if (g.whole) {
    g.rows = um.rows;
    g.cols = um.cols;
  } else {
    g.rows = 1;
    g.cols = v.size();
  }
  if (v.size() > static_cast<std::uint64_t>(std::numeric_limits<std::ptrdiff_t>::max() / 8)) {
    throw std::length_error("kindling::audit: argument 'view' has " + std::to_string(v.size()) +
                            " elements; expected fewer than fit in memory as doubles");
  }
  g.values.resize(static_cast<std::size_t>(v.size()));
  // One row of the region (its innermost dimension) at a time; the memory offset of the
  // next row by an odometer over the outer dimensions, and a whole tensor's unit-matrix
  // position by unit_walk: no division or multi-index sum per element.
  const std::uint64_t row_length = part.extent()[r - 1];
  const std::ptrdiff_t step = static_cast<std::ptrdiff_t>(v.stride(r - 1));
  std::vector<std::uint64_t> local(r, 0);
  std::ptrdiff_t row_offset = 0;
  unit_walk unit(um, 0);
  const auto flat_of = [&](std::uint64_t j) {  // global row-major index of local[..], j
    std::uint64_t flat = 0;
    for (std::size_t d = 0; d < r; ++d) flat = flat * global[d] + part.offset()[d] + (d + 1 == r ? j : local[d]);
    return flat;
  };
  for (std::uint64_t count = 0; count < v.size(); count += row_length) {
    const element* row = v.data() + row_offset;
    for (std::uint64_t j = 0; j < row_length; ++j) {
      const double x = element_traits<element>::to_double(row[static_cast<std::ptrdiff_t>(j) * step]);
      if (!std::isfinite(x)) {
        if (g.non_finite == 0) {
          g.first_non_finite = flat_of(j);
          g.first_non_finite_value = x;
        }
        ++g.non_finite;
        if (std::isnan(x)) ++g.nan_count;
      }
      if (g.whole) {
        g.values[static_cast<std::size_t>(unit.row() * g.cols + unit.col())] = x;
        unit.next();
      } else {
        g.values[static_cast<std::size_t>(count + j)] = x;
      }
    }
    for (std::size_t d = r - 1; d-- > 0;) {  // row-major odometer over the outer dimensions
      row_offset += static_cast<std::ptrdiff_t>(v.stride(d));
      if (++local[d] < part.extent()[d]) break;
      row_offset -= static_cast<std::ptrdiff_t>(part.extent()[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
      local[d] = 0;
    }
  }
  return g;
}

inline void require_whole(const gathered& g, const char* audit) {
  if (!g.whole) {
    throw std::invalid_argument(std::string("kindling::") + audit +
                                ": argument 'view' holds only a region of its tensor; expected the "
                                "whole tensor, because the check compares whole units");
  }
}

// "3 of 4096 values are not finite (the first, NaN, at flat index 17)".
inline std::string non_finite_sentence(const gathered& g) {
  const double x = g.first_non_finite_value;
  const std::string first = std::isnan(x) ? "NaN" : (x > 0 ? "+infinity" : "-infinity");
  return std::to_string(g.non_finite) + " of " + std::to_string(g.values.size()) +
         " values are not finite (" + std::to_string(g.nan_count) + " NaN, " +
         std::to_string(g.non_finite - g.nan_count) + " infinite; the first, " + first +
         ", at flat index " + std::to_string(g.first_non_finite) + ")";
}

}  // namespace kindling::detail

#endif  // KINDLING_AUDIT_DETAIL_GATHER_HPP
