// kindling/eigen.hpp: views of Eigen objects, Eigen's half types as elements, and
// fill(), initialize() and initialize_bias() taking Eigen objects directly. Include it
// only if you use Eigen 3.4.
//
// The logical shape of a dense Eigen object is rows x cols read in row-major order,
// whatever its storage order: element (i, j) of a row-major and of a column-major
// matrix gets the same value. The logical shape of an Eigen::Tensor is its
// dimensions, also read in row-major order (last index fastest), although Eigen
// stores tensors column-major by default. The strides do the rest.
//
//   Eigen::MatrixXf w(256, 784);
//   kindling::fill(w, kindling::dist::normal{0.0, 0.05}, kindling::make_stream(7, "encoder.w"));
//   // a process holding rows 128..255 of the same 256 x 784 parameter:
//   kindling::fill(kindling::view_of(shard).as_part_of({256, 784}, {128, 0}), dist, s);
//
// A vector (VectorXf, RowVectorXd, a segment, a column) is n x 1 or 1 x n here, as in
// Eigen; initialize_bias takes it as the bias vector of its n elements:
//   Eigen::VectorXf b(256);
//   kindling::initialize_bias(b, kindling::zeros{});
//   kindling::initialize_bias(b.segment(4, 1), kindling::constant{0.5});  // one element
#ifndef KINDLING_EIGEN_HPP
#define KINDLING_EIGEN_HPP

#include <Eigen/Core>
#include <unsupported/Eigen/CXX11/Tensor>

#include <array>
#include <cstdint>
#include <type_traits>
#include <utility>

#include "kindling/element.hpp"
#include "kindling/fill.hpp"
#include "kindling/view.hpp"

namespace kindling {

namespace detail {

// element_traits of a foreign 16-bit type that has the same bits as one of ours.
template <class Foreign, class Ours>
struct forwarded_element_traits : element_traits<Ours> {
  using stored_as = Ours;  // the audits test Foreign's values as Ours's (audit/detail/stored.hpp)
  using compute_type = typename element_traits<Ours>::compute_type;
  static Foreign from_compute(compute_type x, const element_bounds& b) noexcept {
    return Eigen::numext::bit_cast<Foreign>(element_traits<Ours>::from_compute(x, b).bits);
  }
  static double to_double(Foreign x) noexcept {
    Ours ours{};
    ours.bits = Eigen::numext::bit_cast<std::uint16_t>(x);
    return element_traits<Ours>::to_double(ours);
  }
};

template <class Derived>
constexpr bool eigen_writable_direct =
    (int(Derived::Flags) & Eigen::DirectAccessBit) != 0 && (int(Derived::Flags) & Eigen::LvalueBit) != 0;

template <class Derived>
constexpr bool eigen_readable_direct = (int(Derived::Flags) & Eigen::DirectAccessBit) != 0;

template <class T>
constexpr bool is_eigen_plain = std::is_base_of<Eigen::PlainObjectBase<T>, T>::value;

// Dense objects (anything derived from some DenseBase<D>: a VectorBlock such as
// v.segment(i, n) derives from DenseBase<Block<...>>, not from DenseBase of itself) and the
// tensor types view_of takes.
template <class D>
std::true_type derives_from_dense(const Eigen::DenseBase<D>*);
std::false_type derives_from_dense(const void*);
template <class T>
struct is_eigen_object : decltype(derives_from_dense(std::declval<T*>())) {};
template <class Scalar, int N, int Options, class Index>
struct is_eigen_object<Eigen::Tensor<Scalar, N, Options, Index>> : std::true_type {};
template <class Plain, int MapOptions, template <class> class MakePointer>
struct is_eigen_object<Eigen::TensorMap<Plain, MapOptions, MakePointer>> : std::true_type {};

// rows x cols, row-major logical order, strides from the storage order.
template <class Scalar, class Derived>
strided_view<Scalar> dense_view(Scalar* data, const Eigen::DenseBase<Derived>& x) {
  const auto inner = static_cast<std::int64_t>(x.derived().innerStride());
  const auto outer = static_cast<std::int64_t>(x.derived().outerStride());
  const shape extents{x.rows(), x.cols()};
  const strides steps = Derived::IsRowMajor ? strides{outer, inner} : strides{inner, outer};
  return strided_view<Scalar>(data, extents, region::whole(extents), steps);
}

// A tensor's dimensions in row-major logical order, strides from its layout.
template <std::size_t n, class Scalar, class Dimensions>
strided_view<Scalar> tensor_view(Scalar* data, const Dimensions& dims, int layout) {
  std::array<std::uint64_t, n> extents{};
  for (std::size_t d = 0; d < n; ++d) {
    if (dims[d] < 0) {
      throw std::invalid_argument("kindling: an Eigen tensor has dimension " + std::to_string(d) +
                                  " of extent " + std::to_string(dims[d]) + "; expected extents >= 0");
    }
    extents[d] = static_cast<std::uint64_t>(dims[d]);
  }
  const shape global(extents.begin(), extents.end());
  const strides dense = layout == Eigen::RowMajor ? strides::row_major(global) : strides::column_major(global);
  return strided_view<Scalar>(data, global, region::whole(global), dense);
}

}  // namespace detail

/// Eigen::half is filled exactly as kindling::float16 (same bits, round to nearest even).
template <>
struct element_traits<Eigen::half> : detail::forwarded_element_traits<Eigen::half, float16> {};
/// Eigen::bfloat16 is filled exactly as kindling::bfloat16.
template <>
struct element_traits<Eigen::bfloat16> : detail::forwarded_element_traits<Eigen::bfloat16, bfloat16> {};

/// A view of a dense Eigen object with direct access: Matrix, Array, Map, Ref, Block,
/// in either storage order. Its logical shape is {rows, cols}.
template <class Derived, std::enable_if_t<detail::eigen_writable_direct<Derived>, int> = 0>
strided_view<typename Derived::Scalar> view_of(Eigen::DenseBase<Derived>& x) {
  return detail::dense_view(x.derived().data(), x);
}
/// A read-only view of a dense Eigen object.
template <class Derived, std::enable_if_t<detail::eigen_readable_direct<Derived>, int> = 0>
strided_view<const typename Derived::Scalar> view_of(const Eigen::DenseBase<Derived>& x) {
  return detail::dense_view(x.derived().data(), x);
}
/// A view of a temporary block, map or ref (m.block(...), m.col(j), Map<...>(p, r, c)):
/// they borrow memory that outlives them. A temporary Matrix or Array is refused at
/// compile time, since its view would dangle.
template <class Derived, std::enable_if_t<detail::eigen_writable_direct<Derived> && !detail::is_eigen_plain<Derived> &&
                                              !std::is_const<Derived>::value,
                                          int> = 0>
strided_view<typename Derived::Scalar> view_of(Eigen::DenseBase<Derived>&& x) {
  return detail::dense_view(x.derived().data(), x);
}

/// A view of an Eigen::Tensor (column-major by default; logical order is row-major).
template <class Scalar, int N, int Options, class Index>
strided_view<Scalar> view_of(Eigen::Tensor<Scalar, N, Options, Index>& t) {
  return detail::tensor_view<std::size_t(N)>(t.data(), t.dimensions(), int(Options) & Eigen::RowMajor);
}
template <class Scalar, int N, int Options, class Index>
strided_view<const Scalar> view_of(const Eigen::Tensor<Scalar, N, Options, Index>& t) {
  return detail::tensor_view<std::size_t(N)>(t.data(), t.dimensions(), int(Options) & Eigen::RowMajor);
}
/// A view of an Eigen::TensorMap over a dense tensor (also const tensors, read-only).
template <class Plain, int MapOptions, template <class> class MakePointer>
auto view_of(const Eigen::TensorMap<Plain, MapOptions, MakePointer>& t) {
  using scalar = std::remove_pointer_t<decltype(t.data())>;
  return detail::tensor_view<std::size_t(Plain::NumDimensions), scalar>(t.data(), t.dimensions(), int(Plain::Layout) & Eigen::RowMajor);
}

/// fill(x, ...) for every Eigen object view_of accepts (see fill.hpp); for a region
/// of a larger shape, fill view_of(x).as_part_of(global, offset).
template <class X>
struct view_adapter<X, std::enable_if_t<detail::is_eigen_object<std::remove_const_t<X>>::value>> {
  static auto view(X& x) { return view_of(x); }
};

}  // namespace kindling

#endif  // KINDLING_EIGEN_HPP
