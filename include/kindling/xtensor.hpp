// kindling/xtensor.hpp: views of xtensor containers, adapted memory and strided
// views, and fill() taking them directly. Include it only if you use xtensor 0.24.
//
// Any xtensor expression with a data interface (xt::xarray, xt::xtensor, xt::adapt'ed
// memory, xt::strided_view, xt::view of strided slices) becomes a strided_view whose
// logical shape is the expression's shape read in row-major order, with the
// expression's own strides, whatever its layout.
//
//   xt::xtensor<float, 4> kernel({32, 16, 3, 3});
//   kindling::fill(kernel, kindling::dist::uniform{-0.1, 0.1}, kindling::make_stream(3, "conv1.w"));
#ifndef KINDLING_XTENSOR_HPP
#define KINDLING_XTENSOR_HPP

#include <xtensor/xexpression.hpp>
#include <xtensor/xutils.hpp>

#include <cstdint>
#include <type_traits>
#include <utility>

#include "kindling/fill.hpp"
#include "kindling/view.hpp"

namespace kindling {

namespace detail {

template <class X, class = void>
struct has_data_offset : std::false_type {};
template <class X>
struct has_data_offset<X, std::void_t<decltype(std::declval<const X&>().data_offset())>> : std::true_type {};

// An xtensor expression whose elements sit in memory at known strides.
template <class X, class = void>
struct is_xtensor_strided : std::false_type {};
template <class X>
struct is_xtensor_strided<X, std::enable_if_t<xt::is_xexpression<std::remove_const_t<X>>::value &&
                                              xt::has_data_interface<X>::value && xt::has_strides<X>::value>>
    : std::true_type {};

template <class X>
auto xtensor_view(X& x) {
  using scalar = std::remove_reference_t<decltype(*x.data())>;
  scalar* first = x.data();
  if constexpr (has_data_offset<X>::value) first += x.data_offset();
  const auto& extents = x.shape();
  const auto& steps = x.strides();
  const shape global(extents.begin(), extents.end());
  return strided_view<scalar>(first, global, region::whole(global), strides(steps.begin(), steps.end()));
}

}  // namespace detail

/// A view of an xtensor container, adaptor or strided view (lvalue).
template <class X, std::enable_if_t<detail::is_xtensor_strided<X>::value, int> = 0>
auto view_of(X& x) {
  return detail::xtensor_view(x);
}
/// A view of a temporary xtensor view (xt::view(a, ...), xt::strided_view(a, ...)),
/// which borrows memory that outlives it. Temporary containers are refused at
/// compile time, since their view would dangle.
template <class X, std::enable_if_t<!std::is_reference<X>::value && detail::is_xtensor_strided<X>::value &&
                                        detail::has_data_offset<X>::value,
                                    int> = 0>
auto view_of(X&& x) {
  return detail::xtensor_view(x);
}

/// fill(x, ...) for every xtensor expression view_of accepts (see fill.hpp).
template <class X>
struct view_adapter<X, std::enable_if_t<detail::is_xtensor_strided<X>::value>> {
  static auto view(X& x) { return view_of(x); }
};

}  // namespace kindling

#endif  // KINDLING_XTENSOR_HPP
