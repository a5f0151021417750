// kindling/schemes/identity.hpp: the identity initialization (the centre-tap geometry it
// shares with delta-orthogonal is in detail/centre_tap.hpp).
//
// identity{gain} writes gain times the identity map (common practice):
//
//   - dense weights (layout out_in or in_out, rank 2): element (o, i) of the unit
//     matrix (schemes/detail/unit_matrix.hpp; o the output unit, i the input) is gain
//     if o == i, else 0. A rectangular weight gets ones on the main diagonal (a
//     rectangular "eye": the first min(out, in) units copy the first min(out, in)
//     inputs, the rest are zero); that is deliberate, not an error.
//   - convolution weights (out_in_spatial, spatial_in_out or out_spatial_in, rank 3 to
//     5): every tap is zero except the centre tap, index floor(k/2) in each spatial
//     dimension, which is gain times the identity over channels. With g groups (read off
//     the fans: fan_out = out/g * receptive_field, fan.hpp) it is the identity of each
//     group, so output channel o copies input channel o: the centre entry (o, j), j
//     indexing the in/g channels of o's group, is gain iff j == o mod (in/g). This needs
//     out_channels == in_channels; a rectangular convolution is refused (a copy of the
//     input is then not defined). For odd kernel sizes the kernel applied with 'same'
//     zero padding (k/2 zeros on each side) reproduces its input times gain; for an even
//     size k the tap at floor(k/2) does so when the padding puts floor(k/2) zeros before
//     the input and the rest after.
//   - transposed convolutions and other ranks are refused.
//
// Nothing is random: the values depend only on the shape, layout, fans and gain.
// The gain is rounded once from double to the compute type; zeros are exact.
#ifndef KINDLING_SCHEMES_IDENTITY_HPP
#define KINDLING_SCHEMES_IDENTITY_HPP

#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <utility>

#include "../element.hpp"
#include "../fan.hpp"
#include "../fill.hpp"
#include "../view.hpp"
#include "detail/centre_tap.hpp"
#include "detail/unit_matrix.hpp"
#include "scheme.hpp"

namespace kindling {


/// gain times the identity: eye on dense weights, the channel identity (per group) at the
/// centre tap of convolution kernels. See the top of this header for the exact rules.
struct identity {
  double gain = 1;

  std::string name() const { return "identity"; }

  void check(const shape& global, const weight_info& w) const {
    detail::require_finite_argument(gain, "identity", "gain");
    if (detail::is_dense_layout(w.layout)) {
      if (global.rank() != 2) {
        detail::reject_argument<std::invalid_argument>(
            "identity", "shape", global.text(),
            "rank 2 for layout " + std::string(layout_name(w.layout)) + " (it has rank " +
                std::to_string(global.rank()) + ")");
      }
      return;
    }
    const detail::centre_tap_geometry g = detail::centre_tap_geometry::of(global, w, "identity");
    if (g.out_per_group() != g.in) {
      detail::reject_argument<std::invalid_argument>(
          "identity", "shape", global.text(),
          "out_channels == in_channels, so that the kernel copies its input (it has " + std::to_string(g.out) +
              " output channels and " + std::to_string(g.in * g.groups) + " input channels (" +
              std::to_string(g.groups) + " groups); use orthogonal or delta_orthogonal for a rectangular kernel)");
    }
  }

  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& /*unused: not random*/,
             Exec&& exec) const {
    const double one = gain;
    if (detail::is_dense_layout(w.layout)) {
      const detail::unit_matrix m(v.global_shape(), w.layout);
      const auto eye = [one](std::uint64_t row, std::uint64_t col) { return row == col ? one : 0.0; };
      detail::write_unit_entries(v, m, eye, std::forward<Exec>(exec));
      return;
    }
    const detail::centre_tap_geometry g = detail::centre_tap_geometry::of(v.global_shape(), w, "identity");
    const auto channel_identity = [one, &g](std::uint64_t o, std::uint64_t j) {
      return j == o % g.in ? one : 0.0;
    };
    detail::write_centre_tap(v, g, channel_identity, std::forward<Exec>(exec));
  }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_IDENTITY_HPP
