// Tests of schemes/detail/unit_matrix.hpp and centre_tap.hpp's walkers: the writers of
// orthogonal, identity, delta-orthogonal and sparse step through flat indices with
// unit_walk / centre_tap_walk instead of locating every element, so each walk must give
// what locate() gives at every index, from any starting index (a region or buffer can
// start anywhere).
#include <doctest/doctest.h>

#include <cstdint>
#include <vector>

#include "kindling/schemes/detail/centre_tap.hpp"
#include "kindling/schemes/detail/unit_matrix.hpp"

using namespace kindling;

TEST_CASE("unit_walk gives locate()'s (row, col) at every index from any start, in every layout") {
  struct example {
    shape global;
    weight_layout layout;
  };
  const std::vector<example> examples = {
      {shape(7, 5), weight_layout::out_in},           {shape(5, 7), weight_layout::in_out},
      {shape(4, 3, 2, 5), weight_layout::out_in_spatial}, {shape(3, 3, 2, 4), weight_layout::spatial_in_out},
      {shape(4, 3, 3, 2), weight_layout::out_spatial_in}, {shape(2, 4, 3, 3), weight_layout::in_out_spatial},
      {shape(3, 2, 4, 2), weight_layout::spatial_out_in}};
  for (const example& e : examples) {
    const detail::unit_matrix m(e.global, e.layout);
    const std::uint64_t total = e.global.element_count();
    for (std::uint64_t first : {std::uint64_t{0}, std::uint64_t{1}, std::uint64_t{6}, total / 2, total - 1}) {
      detail::unit_walk at(m, first);
      bool same = true;
      for (std::uint64_t i = first; i < total; ++i, at.next()) {
        std::uint64_t row = 0, col = 0;
        m.locate(i, &row, &col);
        same = same && at.row() == row && at.col() == col;
      }
      CHECK_MESSAGE(same, "layout ", layout_name(e.layout), " from index ", first);
    }
  }
}

TEST_CASE("centre_tap_walk gives locate()'s (out, in, tap) at every index from any start, in every convolution layout") {
  struct example {
    shape global;
    weight_layout layout;
    fans f;
  };
  // 6 output channels, 4 input channels, a 3 x 2 kernel (6 taps), no groups.
  const std::vector<example> examples = {
      {shape(6, 4, 3, 2), weight_layout::out_in_spatial, fans{24, 36, 6}},
      {shape(3, 2, 4, 6), weight_layout::spatial_in_out, fans{24, 36, 6}},
      {shape(6, 3, 2, 4), weight_layout::out_spatial_in, fans{24, 36, 6}}};
  for (const example& e : examples) {
    const detail::centre_tap_geometry g = detail::centre_tap_geometry::of(e.global, weight_info{e.f, e.layout}, "test");
    const std::uint64_t total = e.global.element_count();
    for (std::uint64_t first : {std::uint64_t{0}, std::uint64_t{5}, std::uint64_t{23}, total - 1}) {
      detail::centre_tap_walk at(g, first);
      bool same = true;
      for (std::uint64_t i = first; i < total; ++i, at.next()) {
        std::uint64_t o = 0, j = 0, t = 0;
        g.locate(i, &o, &j, &t);
        same = same && at.out() == o && at.in() == j && at.tap() == t;
      }
      CHECK_MESSAGE(same, "layout ", layout_name(e.layout), " from index ", first);
    }
  }
}
