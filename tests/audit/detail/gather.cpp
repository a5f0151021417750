// Tests of audit/detail/gather.hpp, the one pass every audit reads: each value lands at
// its unit-matrix position (a whole tensor) or in region order (a region), whatever the
// storage order and strides, and the first non-finite value is reported at its global
// row-major flat index. The expected positions are computed here element by element from
// the definitions (unit_matrix.hpp's header comment), independently of the gather loop.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <limits>
#include <vector>

#include "kindling/audit/detail/gather.hpp"

using namespace kindling;

namespace {

// The value stored for global row-major index i: distinct and exact in float.
float tag(std::uint64_t i) { return static_cast<float>(i) + 0.25f; }

}  // namespace

TEST_CASE("gather puts each value of a whole column-major tensor at its unit-matrix row and column") {
  // [k0, k1, in, out] = [3, 2, 4, 5], stored column-major; units on the last axis.
  const shape global(3, 2, 4, 5);
  std::vector<float> memory(global.element_count());
  const strided_view<float> v(memory.data(), global, storage_order::column_major);
  for (std::uint64_t a = 0; a < 3; ++a)
    for (std::uint64_t b = 0; b < 2; ++b)
      for (std::uint64_t c = 0; c < 4; ++c)
        for (std::uint64_t o = 0; o < 5; ++o) memory[a + 3 * (b + 2 * (c + 4 * o))] = tag(((a * 2 + b) * 4 + c) * 5 + o);
  const detail::gathered g = detail::gather(strided_view<const float>(v), weight_layout::spatial_in_out);
  REQUIRE(g.rows == 5);
  REQUIRE(g.cols == 24);
  bool ok = true;
  for (std::uint64_t o = 0; o < 5; ++o)
    for (std::uint64_t col = 0; col < 24; ++col) ok = ok && g.values[o * 24 + col] == tag(col * 5 + o);
  CHECK_MESSAGE(ok, "row o, column j must hold the element with o on the unit axis and j's digits on the others");
  CHECK(g.non_finite == 0);
}

TEST_CASE("gather reads a region through reversed and padded strides in region order, and finds the first non-finite value") {
  const shape global(6, 9);
  // The whole 6 x 9 tensor in memory with rows reversed and padded to 12.
  std::vector<float> memory(6 * 12, -1.0f);
  const strided_view<float> whole(memory.data() + 5 * 12, global, region::whole(global), strides{-12, 1});
  for (std::uint64_t i = 0; i < 6; ++i)
    for (std::uint64_t j = 0; j < 9; ++j) memory[(5 - i) * 12 + j] = tag(i * 9 + j);
  memory[(5 - 3) * 12 + 4] = std::numeric_limits<float>::infinity();  // global (3, 4): flat 31
  memory[(5 - 4) * 12 + 2] = std::numeric_limits<float>::quiet_NaN();  // global (4, 2): flat 38
  const strided_view<const float> part = strided_view<const float>(whole).sub(region(shape(2, 1), shape(3, 6)));
  const detail::gathered g = detail::gather(part, weight_layout::out_in);
  CHECK_FALSE(g.whole);
  REQUIRE(g.values.size() == 18);
  bool ok = true;
  for (std::uint64_t i = 0; i < 3; ++i)
    for (std::uint64_t j = 0; j < 6; ++j) {
      const double x = g.values[i * 6 + j];
      const std::uint64_t flat = (2 + i) * 9 + 1 + j;
      if (flat == 31 || flat == 38) continue;
      ok = ok && x == tag(flat);
    }
  CHECK_MESSAGE(ok, "local (i, j) of the region must hold global (2 + i, 1 + j)");
  CHECK(g.non_finite == 2);
  CHECK(g.nan_count == 1);
  CHECK_MESSAGE(g.first_non_finite == 31, "the first non-finite value in row-major order is global (3, 4)");
  CHECK(std::isinf(g.first_non_finite_value));
}

TEST_CASE("unit_reader gives each unit's values in place or through its buffer, in unit-matrix order") {
  const shape global(3, 2, 4, 5);  // [k0, k1, in, out], units on the last axis
  std::vector<float> memory(global.element_count());
  for (std::uint64_t i = 0; i < memory.size(); ++i) memory[i] = tag(i);
  const strided_view<const float> rm(memory.data(), global);
  const detail::unit_reader<const float> reader(rm, weight_layout::spatial_in_out);
  CHECK_FALSE(reader.direct());
  std::vector<float> buffer(24);
  bool ok = true;
  for (std::uint64_t o = 0; o < 5; ++o) {
    const float* unit = reader.unit(o, buffer.data());
    for (std::uint64_t col = 0; col < 24; ++col) ok = ok && unit[col] == tag(col * 5 + o);
  }
  CHECK_MESSAGE(ok, "row o, column j must hold the element with o on the unit axis and j's digits on the others");
  const detail::unit_reader<const float> rows(strided_view<const float>(memory.data(), shape(5, 24)), weight_layout::out_in);
  CHECK(rows.direct());
  CHECK(rows.unit(3, nullptr) == memory.data() + 72);
  std::vector<bfloat16> half(6, round_to_bfloat16(1.5f));
  const detail::unit_reader<const bfloat16> converted(strided_view<const bfloat16>(half.data(), shape(2, 3)),
                                                      weight_layout::out_in);
  CHECK_FALSE(converted.direct());
  CHECK(converted.unit(1, buffer.data())[2] == 1.5f);
}
