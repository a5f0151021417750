// kindling/view.hpp: where a tensor's elements live.
//
// A strided_view describes borrowed memory that holds a rectangular region of a
// tensor's full ("global") logical shape. The global shape decides the values (element
// i is the row-major flat index in it, DEVELOPERS.md "Element index and words"); the
// region and the strides only decide which of those values land where. The same type
// serves a whole contiguous tensor, a column-major matrix, a strided sub-block, a
// reversed axis and a shard of a larger tensor held by one process.
//
// A view is validated completely when it is constructed, so a view that exists is a
// valid one: algorithms written against it (fill.hpp) need not check it again, and a
// bad view never gets as far as writing.
#ifndef KINDLING_VIEW_HPP
#define KINDLING_VIEW_HPP

#include <algorithm>
#include <array>
#include <cstddef>
#include <cstdint>
#include <iterator>
#include <limits>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <utility>

#include "detail/compiled_mode.hpp"
#include "detail/error.hpp"

namespace kindling {

/// Largest rank a shape, region or view can have.
inline constexpr std::size_t max_rank = 8;

namespace detail {

// "[3, 4, 5]": how lists of extents, offsets and strides appear in error messages.
template <class T>
std::string list_text(const T* values, std::size_t n) {
  std::string text = "[";
  for (std::size_t k = 0; k < n; ++k) {
    if (k != 0) text += ", ";
    text += std::to_string(values[k]);
  }
  return text + "]";
}

// A fixed-capacity list of up to max_rank integers, the storage behind shape and
// strides. Too many entries is a length_error naming the argument.
template <class T>
class small_list {
 public:
  small_list() noexcept = default;

  template <class It>
  small_list(It first, It last, const char* argument) {
    check_count(static_cast<std::size_t>(std::distance(first, last)), argument);
    for (; first != last; ++first) push(*first, argument);
  }

  static void check_count(std::size_t n, const char* argument) {
    if (n > max_rank) {
      reject_argument<std::length_error>(argument, argument, std::to_string(n) + " entries",
                                         "a rank of at most " + std::to_string(max_rank));
    }
  }

  std::size_t size() const noexcept { return size_; }
  T operator[](std::size_t k) const noexcept { return values_[k]; }
  T& operator[](std::size_t k) noexcept { return values_[k]; }
  const T* begin() const noexcept { return values_.data(); }
  const T* end() const noexcept { return values_.data() + size_; }

  template <class V>
  void push(V value, const char* argument) {
    static_assert(std::is_integral<V>::value, "list entries are integers");
    check_count(size_ + 1, argument);
    if constexpr (std::is_signed<V>::value && std::is_unsigned<T>::value) {
      if (value < 0) {
        reject_argument<std::invalid_argument>(argument, entry_name(argument), std::to_string(value),
                                               "a count >= 0");
      }
    }
    if constexpr (std::is_unsigned<V>::value && std::is_signed<T>::value) {
      if (value > static_cast<std::make_unsigned_t<T>>(std::numeric_limits<T>::max())) {
        reject_argument<std::length_error>(argument, entry_name(argument), std::to_string(value),
                                           "at most " + std::to_string(std::numeric_limits<T>::max()));
      }
    }
    values_[size_++] = static_cast<T>(value);
  }

  std::string text() const { return list_text(values_.data(), size_); }

 private:
  // "shape[2]": the entry being added, as the message names it.
  std::string entry_name(const char* argument) const {
    return std::string(argument) + "[" + std::to_string(size_) + "]";
  }

 public:

  friend bool operator==(const small_list& a, const small_list& b) noexcept {
    return std::equal(a.begin(), a.end(), b.begin(), b.end());
  }
  friend bool operator!=(const small_list& a, const small_list& b) noexcept { return !(a == b); }

 private:
  std::array<T, max_rank> values_{};
  std::size_t size_ = 0;
};

template <class... I>
constexpr bool all_integral = (std::is_integral<I>::value && ...);

template <class It>
using if_iterator = typename std::iterator_traits<It>::iterator_category;

}  // namespace detail

/// The extents of a tensor: rank 0 to max_rank, each a 64-bit count. A shape is a
/// plain value; emptiness (a zero extent) is only an error where a view is made.
class shape {
 public:
  shape() noexcept = default;
  /// shape{64, 3, 3, 3}; any integer types; a negative extent is an invalid_argument.
  template <class... I, std::enable_if_t<(sizeof...(I) > 0) && detail::all_integral<I...>, int> = 0>
  shape(I... extents) {  // NOLINT: implicit on purpose, so that {rows, cols} reads as a shape
    detail::small_list<std::uint64_t>::check_count(sizeof...(I), "shape");
    (extents_.push(extents, "shape"), ...);
  }
  /// From any range of integers given by iterators (e.g. a std::vector's begin/end).
  template <class It, class = detail::if_iterator<It>>
  shape(It first, It last) : extents_(first, last, "shape") {}

  std::size_t rank() const noexcept { return extents_.size(); }
  std::uint64_t operator[](std::size_t d) const noexcept { return extents_[d]; }
  const std::uint64_t* begin() const noexcept { return extents_.begin(); }
  const std::uint64_t* end() const noexcept { return extents_.end(); }

  /// Product of the extents (1 for rank 0); std::length_error if it exceeds 2^64 - 1.
  std::uint64_t element_count() const {
    std::uint64_t count = 1;
    for (std::uint64_t e : extents_) {
      if (e != 0 && count > std::numeric_limits<std::uint64_t>::max() / e) {
        detail::reject_argument<std::length_error>("shape::element_count", "shape", text(),
                                                   "at most 2^64 - 1 elements, a count that fits a "
                                                   "64-bit element index");
      }
      count *= e;
    }
    return count;
  }

  /// "[64, 3, 3, 3]"
  std::string text() const { return extents_.text(); }

  friend bool operator==(const shape& a, const shape& b) noexcept { return a.extents_ == b.extents_; }
  friend bool operator!=(const shape& a, const shape& b) noexcept { return !(a == b); }

 private:
  detail::small_list<std::uint64_t> extents_;
};

/// Signed distances, in elements, between neighbours along each dimension of a
/// view's region (negative strides walk an axis backwards).
class strides {
 public:
  strides() noexcept = default;
  template <class... I, std::enable_if_t<(sizeof...(I) > 0) && detail::all_integral<I...>, int> = 0>
  strides(I... steps) {  // NOLINT: implicit on purpose
    detail::small_list<std::int64_t>::check_count(sizeof...(I), "strides");
    (steps_.push(steps, "strides"), ...);
  }
  template <class It, class = detail::if_iterator<It>>
  strides(It first, It last) : steps_(first, last, "strides") {}

  std::size_t rank() const noexcept { return steps_.size(); }
  std::int64_t operator[](std::size_t d) const noexcept { return steps_[d]; }
  const std::int64_t* begin() const noexcept { return steps_.begin(); }
  const std::int64_t* end() const noexcept { return steps_.end(); }
  std::string text() const { return steps_.text(); }

  /// Dense strides of a shape stored in row-major (last index fastest) order.
  static strides row_major(const shape& s);
  /// Dense strides of a shape stored in column-major (first index fastest) order.
  static strides column_major(const shape& s);

  friend bool operator==(const strides& a, const strides& b) noexcept { return a.steps_ == b.steps_; }
  friend bool operator!=(const strides& a, const strides& b) noexcept { return !(a == b); }

 private:
  detail::small_list<std::int64_t> steps_;
};

/// Order of a dense block of memory.
enum class storage_order { row_major, column_major };

/// A rectangular part of a global shape: for each dimension, where it starts and how
/// many indices it covers. The offsets are held in a shape (a list of counts).
class region {
 public:
  region() noexcept = default;
  region(const shape& offset, const shape& extent) : offset_(offset), extent_(extent) {}
  /// The region that covers all of s.
  static region whole(const shape& s) {
    region r;
    r.extent_ = s;
    std::array<std::uint64_t, max_rank> zeros{};
    r.offset_ = shape(zeros.begin(), zeros.begin() + static_cast<std::ptrdiff_t>(s.rank()));
    return r;
  }

  std::size_t rank() const noexcept { return extent_.rank(); }
  const shape& offset() const noexcept { return offset_; }
  const shape& extent() const noexcept { return extent_; }
  std::string text() const { return "offset " + offset_.text() + " extent " + extent_.text(); }

  friend bool operator==(const region& a, const region& b) noexcept {
    return a.offset_ == b.offset_ && a.extent_ == b.extent_;
  }
  friend bool operator!=(const region& a, const region& b) noexcept { return !(a == b); }

 private:
  shape offset_;
  shape extent_;
};

namespace detail {

// The views' checks report as the constructor the user called.
[[noreturn]] inline void fail_argument(const std::string& name, const std::string& value,
                                       const std::string& expected) {
  reject_argument<std::invalid_argument>("strided_view", name, value, expected);
}

// The shape, region and stride checks of every view: declared here, defined below in
// the header-only mode and in the compiled library otherwise (detail/compiled_mode.hpp),
// since every file that makes a view reaches them.
KINDLING_COMPILED_INLINE strides dense_strides(const shape& s, storage_order order);
KINDLING_COMPILED_INLINE void check_global_shape(const shape& global, const char* argument);
KINDLING_COMPILED_INLINE void check_region(const shape& global, const region& part);
KINDLING_COMPILED_INLINE void check_strides(const region& part, const strides& steps);

#if defined(KINDLING_COMPILED_DEFINITIONS)
// Dense strides in either order; std::length_error if a stride leaves int64.
KINDLING_COMPILED_INLINE strides dense_strides(const shape& s, storage_order order) {
  std::array<std::int64_t, max_rank> steps{};
  const std::size_t r = s.rank();
  std::uint64_t step = 1;
  for (std::size_t k = 0; k < r; ++k) {
    const std::size_t d = order == storage_order::row_major ? r - 1 - k : k;
    if (step > static_cast<std::uint64_t>(std::numeric_limits<std::int64_t>::max())) {
      reject_argument<std::length_error>("strided_view", "shape", s.text(),
                                         "a shape small enough for dense storage, its strides "
                                         "signed 64-bit element distances");
    }
    steps[d] = static_cast<std::int64_t>(step);
    if (s[d] != 0 && step > std::numeric_limits<std::uint64_t>::max() / s[d]) step = ~std::uint64_t{0};
    else step *= s[d];
  }
  return strides(steps.begin(), steps.begin() + static_cast<std::ptrdiff_t>(r));
}

// Checks a global shape: rank 1..max_rank, no zero extent, element count in 64 bits.
KINDLING_COMPILED_INLINE void check_global_shape(const shape& global, const char* argument) {
  if (global.rank() == 0) {
    fail_argument(argument, "[] (rank 0)",
                  "a rank from 1 to " + std::to_string(max_rank) + " (a scalar is shape {1})");
  }
  for (std::size_t d = 0; d < global.rank(); ++d) {
    if (global[d] == 0) {
      fail_argument(argument, global.text(),
                    "every extent >= 1 (extent 0 in dimension " + std::to_string(d) +
                        "; an empty tensor has nothing to fill)");
    }
  }
  (void)global.element_count();  // throws length_error on overflow
}

// Checks that a region lies inside the global shape and is not empty.
KINDLING_COMPILED_INLINE void check_region(const shape& global, const region& part) {
  if (part.offset().rank() != part.extent().rank() || part.rank() != global.rank()) {
    fail_argument("region", part.text(),
                  "offset and extent of rank " + std::to_string(global.rank()) + " like the global shape " +
                      global.text() + " (they have rank " + std::to_string(part.offset().rank()) + " and " +
                      std::to_string(part.extent().rank()) + ")");
  }
  for (std::size_t d = 0; d < global.rank(); ++d) {
    const std::uint64_t at = part.offset()[d];
    const std::uint64_t n = part.extent()[d];
    if (n == 0) {
      fail_argument("region", part.text(),
                    "every extent >= 1 (extent 0 in dimension " + std::to_string(d) + ")");
    }
    if (at >= global[d] || n > global[d] - at) {
      fail_argument("region", part.text(),
                    "a region inside the global shape " + global.text() + " (it covers indices " +
                        std::to_string(at) + ".." + std::to_string(at) + "+" + std::to_string(n) +
                        "-1 of dimension " + std::to_string(d) + ")");
    }
  }
}

// Checks that no two local indices of the region reach the same element, and that
// every memory distance fits in std::ptrdiff_t. The test used is sufficient, not
// necessary: sorted by |stride|, each dimension must step over everything the
// faster ones span. It accepts every dense or sub-block layout, every reversed or
// permuted axis, and rejects only interleavings nobody builds on purpose.
KINDLING_COMPILED_INLINE void check_strides(const region& part, const strides& steps) {
  const std::size_t r = part.rank();
  if (steps.rank() != r) {
    fail_argument("strides", steps.text(), "rank " + std::to_string(r) + " like the region " + part.text());
  }
  constexpr std::uint64_t limit = static_cast<std::uint64_t>(std::numeric_limits<std::ptrdiff_t>::max());
  std::array<std::size_t, max_rank> order{};
  std::size_t used = 0;
  for (std::size_t d = 0; d < r; ++d) {
    if (part.extent()[d] > 1) order[used++] = d;  // extent-1 dimensions never step
  }
  auto magnitude = [&](std::size_t d) {
    const std::int64_t s = steps[d];
    return s < 0 ? std::uint64_t(0) - static_cast<std::uint64_t>(s) : static_cast<std::uint64_t>(s);
  };
  for (std::size_t k = 1; k < used; ++k) {  // insertion sort of at most max_rank entries
    for (std::size_t j = k; j > 0 && magnitude(order[j]) < magnitude(order[j - 1]); --j) {
      std::swap(order[j], order[j - 1]);
    }
  }
  std::uint64_t span = 0;  // farthest element reached by the faster dimensions
  for (std::size_t k = 0; k < used; ++k) {
    const std::size_t d = order[k];
    const std::uint64_t step = magnitude(d);
    if (step <= span) {
      fail_argument("strides", steps.text(),
                    "strides that give every element of the region " + part.text() +
                        " its own address (with stride " + std::to_string(steps[d]) + " of dimension " +
                        std::to_string(d) + " two elements share memory)");
    }
    const std::uint64_t reach = part.extent()[d] - 1;
    if (step > (limit - span) / reach) {
      reject_argument<std::length_error>("strided_view", "strides", steps.text(),
                                         "memory distances that fit std::ptrdiff_t (with region " +
                                             part.text() + " they span more than 2^63 - 1 elements)");
    }
    span += step * reach;
  }
  // The fill steps through every axis, those of extent 1 too: it adds a stride, then
  // takes back extent * stride when the index wraps. So each |stride| * extent, added to
  // the span, must fit as well, or a size-1 axis with a huge stride overflows there.
  for (std::size_t d = 0; d < r; ++d) {
    const std::uint64_t step = magnitude(d);
    if (step > (limit - span) / part.extent()[d]) {
      reject_argument<std::length_error>(
          "strided_view", "strides", steps.text(),
          "|stride| * extent + " + std::to_string(span) + " (the span of the region) to fit std::ptrdiff_t "
          "(2^63 - 1) in every dimension (dimension " + std::to_string(d) + " has stride " +
              std::to_string(steps[d]) + " and extent " + std::to_string(part.extent()[d]) + " in region " +
              part.text() + ")");
    }
  }
}
#endif

}  // namespace detail

inline strides strides::row_major(const shape& s) { return detail::dense_strides(s, storage_order::row_major); }
inline strides strides::column_major(const shape& s) {
  return detail::dense_strides(s, storage_order::column_major);
}

/// Borrowed memory holding a region of a global logical shape.
///
/// data() points at the element of local index (0, ..., 0) of the region, i.e. global
/// index region().offset(); local index (i0, ..., ik) is at data() + sum_d i_d * stride(d).
/// The view neither owns nor copies the memory. E may be const for read-only use.
template <class E>
class strided_view {
 public:
  using element_type = E;

  /// A whole tensor stored densely in row-major order (the common case).
  strided_view(E* data, const shape& global)
      : strided_view(data, global, region::whole(checked(global)), storage_order::row_major) {}

  /// A whole tensor stored densely in the given order.
  strided_view(E* data, const shape& global, storage_order order)
      : strided_view(data, global, region::whole(checked(global)), order) {}

  /// A region of a global shape, stored densely (only the region's elements) in the given order.
  strided_view(E* data, const shape& global, const region& part,
               storage_order order = storage_order::row_major)
      : strided_view(data, global, part, dense(global, part, order)) {}

  /// A region of a global shape at arbitrary strides (in elements, may be negative).
  strided_view(E* data, const shape& global, const region& part, const kindling::strides& steps)
      : data_(data), global_(global), part_(part), steps_(steps) {
    detail::check_global_shape(global_, "shape");
    detail::check_region(global_, part_);
    detail::check_strides(part_, steps_);
    if (data_ == nullptr) {
      detail::fail_argument("data", "a null pointer",
                            "memory to write to (the region has " + std::to_string(size()) + " elements)");
    }
  }

  /// A read-only view of the same memory.
  template <class U, std::enable_if_t<std::is_same<const U, E>::value && !std::is_const<U>::value, int> = 0>
  strided_view(const strided_view<U>& other) noexcept  // NOLINT: implicit like T* -> const T*
      : data_(other.data()), global_(other.global_shape()), part_(other.part()), steps_(other.memory_strides()) {}

  E* data() const noexcept { return data_; }
  std::size_t rank() const noexcept { return global_.rank(); }
  /// The full logical shape whose row-major flat index decides every value.
  const shape& global_shape() const noexcept { return global_; }
  /// The part of the global shape this memory holds.
  const region& part() const noexcept { return part_; }
  const kindling::strides& memory_strides() const noexcept { return steps_; }
  std::int64_t stride(std::size_t d) const noexcept { return steps_[d]; }
  /// Number of elements in the region (never 0).
  std::uint64_t size() const noexcept {
    std::uint64_t n = 1;
    for (std::uint64_t e : part_.extent()) n *= e;  // cannot overflow: the region fits the global shape
    return n;
  }
  /// True if the view covers the whole global shape.
  bool is_whole() const noexcept { return part_.extent() == global_; }

  /// The sub-view of a region given in global coordinates, which must lie inside this
  /// view's region; it shares this view's memory and strides.
  strided_view sub(const region& inner) const {
    detail::check_region(global_, inner);
    std::ptrdiff_t shift = 0;
    for (std::size_t d = 0; d < rank(); ++d) {
      const std::uint64_t at = inner.offset()[d];
      const std::uint64_t start = part_.offset()[d];
      if (at < start || inner.extent()[d] > part_.extent()[d] - std::min(part_.extent()[d], at - start)) {
        detail::reject_argument<std::invalid_argument>(
            "strided_view::sub", "region", inner.text(),
            "a region inside this view's region " + part_.text() + " (it leaves it in dimension " +
                std::to_string(d) + ")");
      }
      shift += static_cast<std::ptrdiff_t>(at - start) * static_cast<std::ptrdiff_t>(steps_[d]);
    }
    return strided_view(data_ + shift, global_, inner, steps_);
  }

  /// The same memory and strides, now holding the region at `offset` of a larger
  /// global shape (the region's extent stays this view's). This is how a shard, or a
  /// block of a bigger matrix adapted from another library, says where it sits.
  strided_view as_part_of(const shape& global, const shape& offset) const {
    return strided_view(data_, global, region(offset, part_.extent()), steps_);
  }

 private:
  static const shape& checked(const shape& global) {
    detail::check_global_shape(global, "shape");
    return global;
  }
  static kindling::strides dense(const shape& global, const region& part, storage_order order) {
    detail::check_global_shape(global, "shape");
    detail::check_region(global, part);
    return detail::dense_strides(part.extent(), order);
  }

  E* data_;
  shape global_;
  region part_;
  kindling::strides steps_;
};

}  // namespace kindling

#endif  // KINDLING_VIEW_HPP
