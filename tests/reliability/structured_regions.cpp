// Structured schemes on a small region of a huge weight: orthogonal refuses a region
// that would cost a factorization far larger than the region (with a message naming the
// shape), and sparse draws only the units and columns the region holds, so a large
// nonzero count on a tiny region is quick (rows of tests/reliability/README.md).
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/schemes/orthogonal.hpp"
#include "kindling/schemes/sparse.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
constexpr float sentinel = -7.25f;
const stream heat = make_stream(12, "heat_exchanger.w");
}  // namespace

TEST_CASE("orthogonal and delta-orthogonal refuse a region of a weight above 2^26 entries, naming the shape") {
  float cell = sentinel;
  const shape big{16384, 16384};
  const strided_view<float> one(&cell, big, region({0, 0}, {1, 1}));
  std::string m = message_of<std::length_error>(
      [&] { initialize(one, weight_info{fans{16384, 16384, 1}, weight_layout::out_in}, orthogonal{}, heat); });
  CHECK(mentions(m, "kindling::orthogonal: argument 'region' = offset [0, 0] extent [1, 1] of shape [16384, 16384]"));
  CHECK(mentions(m, "needs the whole 16384 x 16384 factorization"));
  CHECK(mentions(m, "expected a region of a weight whose matrix has at most 2^26 entries"));
  CHECK(std::memcmp(&cell, &sentinel, sizeof cell) == 0);

  const shape kernel{8192, 16384, 3, 3};
  const strided_view<float> tap(&cell, kernel, region({5, 7, 1, 1}, {1, 1, 1, 1}));
  m = message_of<std::length_error>([&] {
    initialize(tap, weight_info{fans{16384 * 9, 8192 * 9, 9}, weight_layout::out_in_spatial}, delta_orthogonal{},
               heat);
  });
  CHECK(mentions(m, "kindling::delta_orthogonal: argument 'region'"));
  CHECK(mentions(m, "of shape [8192, 16384, 3, 3], expected a region of a weight"));
  CHECK(mentions(m, "needs the whole 8192 x 16384 factorization"));
  CHECK(std::memcmp(&cell, &sentinel, sizeof cell) == 0);
}

TEST_CASE("a region of a small orthogonal weight is still filled, equal to that part of the whole") {
  std::vector<float> whole(48 * 20), part(6 * 5, sentinel);
  const weight_info w{fans{20, 48, 1}, weight_layout::out_in};
  initialize(strided_view<float>(whole.data(), {48, 20}), w, orthogonal{}, heat);
  initialize(strided_view<float>(part.data(), {48, 20}, region({30, 11}, {6, 5})), w, orthogonal{}, heat);
  for (std::size_t r = 0; r < 6; ++r) {
    for (std::size_t c = 0; c < 5; ++c) CHECK(part[r * 5 + c] == whole[(30 + r) * 20 + 11 + c]);
  }
}

TEST_CASE("sparse with k > 64 (the bitmap path) gives each unit k nonzeros, and a region equals the whole") {
  const std::uint64_t rows = 3, cols = 4096;
  const sparse sp{1000, 1.0};
  const weight_info w{fans{cols, rows, 1}, weight_layout::out_in};
  std::vector<float> whole(rows * cols);
  initialize(strided_view<float>(whole.data(), {rows, cols}), w, sp, heat);
  for (std::uint64_t r = 0; r < rows; ++r) {
    std::uint64_t nonzero = 0;
    for (std::uint64_t c = 0; c < cols; ++c) nonzero += whole[r * cols + c] != 0.0f;
    CHECK(nonzero == 1000);
  }
  std::vector<float> part(2 * 300, sentinel);
  initialize(strided_view<float>(part.data(), {rows, cols}, region({1, 3000}, {2, 300})), w, sp, heat);
  for (std::uint64_t r = 0; r < 2; ++r) {
    for (std::uint64_t c = 0; c < 300; ++c) CHECK(part[r * 300 + c] == whole[(1 + r) * cols + 3000 + c]);
  }
}

TEST_CASE("sparse with 2^20 nonzeros per unit on a small region draws only that region's unit") {
  // 2 units of 2^21 incoming weights: drawing one unit keeps a 256 KiB bitmap, not a
  // sorted list grown by 2^20 insertions (which took O(k^2) time: minutes).
  const std::uint64_t cols = std::uint64_t{1} << 21, k = std::uint64_t{1} << 20, window = 65536;
  const shape global{2, cols};
  const weight_info w{fans{cols, 2, 1}, weight_layout::out_in};
  std::vector<float> part(window, sentinel), plain(window);
  initialize(strided_view<float>(part.data(), global, region({1, 1000000}, {1, window})), w, sparse{k, 1.0}, heat);
  // The values a chosen weight takes: the normal values of the same elements.
  fill(strided_view<float>(plain.data(), global, region({1, 1000000}, {1, window})), dist::normal{0.0, 1.0}, heat);
  std::uint64_t nonzero = 0;
  bool values_match = true;
  for (std::uint64_t c = 0; c < window; ++c) {
    if (part[c] != 0.0f) {
      ++nonzero;
      values_match = values_match && part[c] == plain[c];
    }
  }
  CHECK(values_match);
  // Half of the weights are chosen: 32768 expected, standard deviation about 128.
  CHECK(std::fabs(static_cast<double>(nonzero) - 32768.0) < 6 * 128.0);
}
