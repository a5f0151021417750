// kindling/audit/detail/gather.hpp: one pass over a view that copies its values, as
// doubles, into unit-major order (the unit matrix of schemes/detail/unit_matrix.hpp:
// row = output unit, column = incoming connection), and notes non-finite values.
// Every audit reads this copy, so each check is written once for every element type,
// storage order and stride.
//
// unit_reader reads the same unit matrix one unit at a time without copying the tensor:
// a pointer into the view when a unit is contiguous and already of its compute type
// (float for float, float16 and bfloat16; double for double), otherwise the unit's
// values converted into a caller's buffer of one unit. Audits that look at units one by
// one (symmetry.hpp) keep their extra memory to a few values a unit this way.
#ifndef KINDLING_AUDIT_DETAIL_GATHER_HPP
#define KINDLING_AUDIT_DETAIL_GATHER_HPP

#include <cmath>
#include <cstddef>
#include <cstdint>
#include <cstring>
#include <limits>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <vector>

#include "../../element.hpp"
#include "../../fan.hpp"
#include "../../schemes/detail/unit_matrix.hpp"
#include "../../view.hpp"
#include "stored.hpp"

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

/// The units of a whole view, read one at a time. Element (row o, column j = a inner + b)
/// of the unit matrix sits at o on the unit axis, a's digits on the axes before it and
/// b's on the axes after it, so its memory offset is o s + outer[a] + inner[b].
template <class E>
class unit_reader {
 public:
  using element = std::remove_const_t<E>;
  using compute = compute_type_t<element>;

  unit_reader(const strided_view<E>& v, weight_layout layout) : data_(v.data()) {
    const shape& global = v.global_shape();
    const std::size_t axis = unit_axis(layout, global.rank());
    const unit_matrix um(global, layout);
    rows_ = um.rows;
    cols_ = um.cols;
    unit_step_ = static_cast<std::ptrdiff_t>(v.stride(axis));
    outer_ = offsets(v, 0, axis);
    inner_ = offsets(v, axis + 1, global.rank());
    contiguous_ = outer_.size() == 1;
    for (std::size_t b = 0; b < inner_.size() && contiguous_; ++b) contiguous_ = inner_[b] == static_cast<std::ptrdiff_t>(b);
    direct_ = std::is_same<element, compute>::value && contiguous_;
  }

  std::uint64_t rows() const noexcept { return rows_; }
  std::uint64_t cols() const noexcept { return cols_; }
  /// True when units are read in place (no conversion, no gather).
  bool direct() const noexcept { return direct_; }

  /// The cols stored values of unit o in place, when a unit's values are consecutive in
  /// memory; else nullptr.
  const element* contiguous_unit(std::uint64_t o) const noexcept {
    return contiguous_ ? data_ + static_cast<std::ptrdiff_t>(o) * unit_step_ : nullptr;
  }

  /// The cols values of unit o: in the view itself, or written to buffer (cols values).
  const compute* unit(std::uint64_t o, compute* buffer) const {
    const element* base = data_ + static_cast<std::ptrdiff_t>(o) * unit_step_;
    if (direct_) return reinterpret_cast<const compute*>(base);
    if constexpr (std::is_same<typename stored_type<element>::type, bfloat16>::value) {
      if (contiguous_) {  // a bfloat16 is the upper half of a float: a loop that vectorizes
        for (std::uint64_t j = 0; j < cols_; ++j) buffer[j] = float_of_bfloat16_at(base, j);
        return buffer;
      }
    }
    compute* out = buffer;
    for (const std::ptrdiff_t a : outer_) {
      for (const std::ptrdiff_t b : inner_) *out++ = static_cast<compute>(element_traits<element>::to_double(base[a + b]));
    }
    return buffer;
  }

 private:
  // Memory offsets of every multi-index over axes [first, last), in row-major order.
  static std::vector<std::ptrdiff_t> offsets(const strided_view<E>& v, std::size_t first, std::size_t last) {
    std::vector<std::ptrdiff_t> out{0};
    for (std::size_t d = first; d < last; ++d) {
      std::vector<std::ptrdiff_t> next;
      next.reserve(out.size() * static_cast<std::size_t>(v.global_shape()[d]));
      for (const std::ptrdiff_t o : out) {
        for (std::uint64_t i = 0; i < v.global_shape()[d]; ++i) {
          next.push_back(o + static_cast<std::ptrdiff_t>(i) * static_cast<std::ptrdiff_t>(v.stride(d)));
        }
      }
      out.swap(next);
    }
    return out;
  }

  const element* data_;
  std::uint64_t rows_ = 0, cols_ = 0;
  std::ptrdiff_t unit_step_ = 0;
  std::vector<std::ptrdiff_t> outer_, inner_;
  bool contiguous_ = false;  // a unit's values are consecutive in memory
  bool direct_ = false;
};

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
