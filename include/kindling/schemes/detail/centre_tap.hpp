// kindling/schemes/detail/centre_tap.hpp: the centre-tap geometry of a convolution
// kernel (shared by identity and delta-orthogonal), and writers of a weight given entry
// by entry of its unit matrix or of its centre tap.
#ifndef KINDLING_SCHEMES_DETAIL_CENTRE_TAP_HPP
#define KINDLING_SCHEMES_DETAIL_CENTRE_TAP_HPP

#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <utility>

#include "../../element.hpp"
#include "../../fan.hpp"
#include "../../fill.hpp"
#include "../../view.hpp"
#include "../scheme.hpp"
#include "unit_matrix.hpp"

namespace kindling {

namespace detail {

inline bool is_dense_layout(weight_layout layout) noexcept {
  return layout == weight_layout::out_in || layout == weight_layout::in_out;
}
inline bool is_convolution_layout(weight_layout layout) noexcept {
  return layout == weight_layout::out_in_spatial || layout == weight_layout::spatial_in_out ||
         layout == weight_layout::out_spatial_in;
}

// A convolution weight seen as out x in channel matrices, one per kernel tap, and the
// centre tap among them. Built by centre_tap_geometry::of(), which validates the shape,
// layout and fans and names the argument that disagrees.
struct centre_tap_geometry {
  weight_layout layout = weight_layout::out_in_spatial;
  std::uint64_t out = 0;     // output channels (the out axis)
  std::uint64_t in = 0;      // input channels per group (the in axis, in/g)
  std::uint64_t taps = 1;    // receptive field: product of the kernel sizes
  std::uint64_t groups = 1;  // from the fans
  std::uint64_t centre = 0;  // row-major flat index of the tap floor(k/2) in the kernel

  std::uint64_t out_per_group() const noexcept { return out / groups; }

  // Channel pair (o, j) and kernel tap t of global row-major index i.
  void locate(std::uint64_t i, std::uint64_t* o, std::uint64_t* j, std::uint64_t* t) const noexcept {
    switch (layout) {
      case weight_layout::spatial_in_out:  // [k..., in, out]
        *o = i % out;
        *j = (i / out) % in;
        *t = i / out / in;
        return;
      case weight_layout::out_spatial_in:  // [out, k..., in]
        *j = i % in;
        *t = (i / in) % taps;
        *o = i / in / taps;
        return;
      default:  // out_in_spatial [out, in, k...]
        *t = i % taps;
        *j = (i / taps) % in;
        *o = i / taps / in;
        return;
    }
  }

  static centre_tap_geometry of(const shape& global, const weight_info& w, const char* scheme) {
    const std::string where = std::string("kindling::") + scheme;
    if (!is_convolution_layout(w.layout)) {
      throw std::invalid_argument(where + ": argument 'layout' = " + std::string(layout_name(w.layout)) +
                                  ", expected a convolution layout (out_in_spatial, spatial_in_out "
                                  "or out_spatial_in)");
    }
    const std::size_t rank = global.rank();
    if (rank < 3 || rank > 5) {
      throw std::invalid_argument(where + ": argument 'shape' = " + global.text() + " has rank " +
                                  std::to_string(rank) + ", expected rank 3 to 5 for layout " +
                                  std::string(layout_name(w.layout)));
    }
    centre_tap_geometry g;
    g.layout = w.layout;
    std::size_t first_spatial = 2;
    switch (w.layout) {
      case weight_layout::spatial_in_out:
        g.out = global[rank - 1];
        g.in = global[rank - 2];
        first_spatial = 0;
        break;
      case weight_layout::out_spatial_in:
        g.out = global[0];
        g.in = global[rank - 1];
        first_spatial = 1;
        break;
      default:
        g.out = global[0];
        g.in = global[1];
        break;
    }
    for (std::size_t d = first_spatial; d < first_spatial + rank - 2; ++d) {
      g.centre = g.centre * global[d] + global[d] / 2;
      g.taps *= global[d];
    }
    // The fans say how many groups share the out axis (fan.hpp); they must agree with
    // the shape, or the caller described another weight.
    const fans& f = w.fans;
    const bool consistent = f.receptive_field == g.taps && f.fan_in == g.in * g.taps &&
                            f.fan_out != 0 && f.fan_out % g.taps == 0 &&
                            g.out % (f.fan_out / g.taps) == 0;
    if (!consistent) {
      throw std::invalid_argument(
          where + ": argument 'fans' = (fan_in " + std::to_string(f.fan_in) + ", fan_out " +
          std::to_string(f.fan_out) + ", receptive_field " + std::to_string(f.receptive_field) +
          ") does not describe the convolution weight of shape " + global.text() + " in layout " +
          std::string(layout_name(w.layout)) + "; expected receptive_field " + std::to_string(g.taps) +
          ", fan_in " + std::to_string(g.in * g.taps) + " and fan_out out_channels/groups * " +
          std::to_string(g.taps) + " for some groups dividing " + std::to_string(g.out));
    }
    g.groups = g.out / (f.fan_out / g.taps);
    return g;
  }
};

// The (o, j, t) of flat indices first, first + 1, ... in turn: locate() once, then the
// layout's innermost axis counts up and carries, with no division per element.
class centre_tap_walk {
 public:
  centre_tap_walk(const centre_tap_geometry& g, std::uint64_t first) noexcept : g_(g) {
    g.locate(first, &o_, &j_, &t_);
  }
  std::uint64_t out() const noexcept { return o_; }
  std::uint64_t in() const noexcept { return j_; }
  std::uint64_t tap() const noexcept { return t_; }
  void next() noexcept {
    switch (g_.layout) {
      case weight_layout::spatial_in_out:  // [k..., in, out]
        carry(o_, g_.out, j_, g_.in, t_);
        return;
      case weight_layout::out_spatial_in:  // [out, k..., in]
        carry(j_, g_.in, t_, g_.taps, o_);
        return;
      default:  // out_in_spatial [out, in, k...]
        carry(t_, g_.taps, j_, g_.in, o_);
        return;
    }
  }

 private:
  // Steps the three digits (innermost first) of a mixed-radix count.
  static void carry(std::uint64_t& d0, std::uint64_t r0, std::uint64_t& d1, std::uint64_t r1,
                    std::uint64_t& d2) noexcept {
    if (++d0 < r0) return;
    d0 = 0;
    if (++d1 < r1) return;
    d1 = 0;
    ++d2;
  }
  const centre_tap_geometry& g_;
  std::uint64_t o_ = 0, j_ = 0, t_ = 0;
};

// Writes the weight whose unit-matrix entry (row, col) is value(row, col) (a double),
// rounded to the compute type, into view v (any region, order, element type).
template <class E, class Value, class Exec>
void write_unit_entries(const strided_view<E>& v, const unit_matrix& um, const Value& value, Exec&& exec) {
  using compute = compute_type_t<E>;
  const auto gen = [&um, &value](std::uint64_t first, std::size_t n, compute* out) {
    unit_walk at(um, first);
    for (std::size_t k = 0; k < n; ++k, at.next()) out[k] = static_cast<compute>(value(at.row(), at.col()));
  };
  fill_generated(v, unbounded, gen, std::forward<Exec>(exec));
}

// Writes the convolution kernel that is centre_value(o, j) (a double) at the centre tap
// and zero at every other tap into view v.
template <class E, class Value, class Exec>
void write_centre_tap(const strided_view<E>& v, const centre_tap_geometry& g, const Value& centre_value,
                      Exec&& exec) {
  using compute = compute_type_t<E>;
  const auto gen = [&g, &centre_value](std::uint64_t first, std::size_t n, compute* out) {
    centre_tap_walk at(g, first);
    for (std::size_t k = 0; k < n; ++k, at.next()) {
      out[k] = at.tap() == g.centre ? static_cast<compute>(centre_value(at.out(), at.in())) : compute(0);
    }
  };
  fill_generated(v, unbounded, gen, std::forward<Exec>(exec));
}

}  // namespace detail

}  // namespace kindling

#endif  // KINDLING_SCHEMES_DETAIL_CENTRE_TAP_HPP
