// kindling/audit/detail/centre_split.hpp: a gathered convolution kernel split into its
// centre tap, as an out x in matrix, and what lies at the other taps, which a
// delta-orthogonal or centre-tap identity kernel has exactly zero. Shared by
// check_delta_orthogonal (structure.hpp) and identify_scheme (identify.hpp).
#ifndef KINDLING_AUDIT_DETAIL_CENTRE_SPLIT_HPP
#define KINDLING_AUDIT_DETAIL_CENTRE_SPLIT_HPP

#include <cstddef>
#include <cstdint>
#include <vector>

#include "../../schemes/detail/centre_tap.hpp"
#include "../../schemes/detail/unit_matrix.hpp"
#include "gather.hpp"

namespace kindling::detail {

struct centre_taps {
  std::vector<double> centre;    // out x in, row-major: centre[o * in + j]
  std::uint64_t off_centre = 0;  // nonzero values at the other taps (at most 1 if asked to stop)
  std::uint64_t first_out = 0, first_in = 0, first_tap = 0;  // where the first of them is
  double first_value = 0;
};

// g is the whole kernel gathered in `layout`; stop_at_first: return as soon as one
// off-centre value is nonzero (the caller only needs to know that there is one).
inline centre_taps split_centre_taps(const gathered& g, const centre_tap_geometry& geo, const shape& global,
                                     weight_layout layout, bool stop_at_first) {
  centre_taps c;
  c.centre.assign(static_cast<std::size_t>(geo.out * geo.in), 0.0);
  const unit_matrix um(global, layout);
  centre_tap_walk tap(geo, 0);
  unit_walk unit(um, 0);
  for (std::size_t i = 0; i < g.values.size(); ++i, tap.next(), unit.next()) {
    const double x = g.values[static_cast<std::size_t>(unit.row() * g.cols + unit.col())];
    if (tap.tap() == geo.centre) {
      c.centre[static_cast<std::size_t>(tap.out() * geo.in + tap.in())] = x;
    } else if (x != 0) {
      if (c.off_centre == 0) {
        c.first_out = tap.out();
        c.first_in = tap.in();
        c.first_tap = tap.tap();
        c.first_value = x;
      }
      ++c.off_centre;
      if (stop_at_first) break;
    }
  }
  return c;
}

}  // namespace kindling::detail

#endif  // KINDLING_AUDIT_DETAIL_CENTRE_SPLIT_HPP
