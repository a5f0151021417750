// Tests of propagate/convolution_map.hpp: where a placed convolution reads.
//
// Source of the output-size arithmetic: Dumoulin & Visin, "A guide to convolution
// arithmetic for deep learning" (2016), relationship 15:
//   o = floor((i + 2p - k - (k - 1)(d - 1)) / s) + 1.
#include "kindling/propagate/convolution_map.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
// Dumoulin & Visin (2016), relationship 15, written out independently of the header.
std::uint64_t guide_output_size(std::uint64_t i, std::uint64_t k, std::uint64_t s, std::uint64_t p, std::uint64_t d) {
  return (i + 2 * p - k - (k - 1) * (d - 1)) / s + 1;
}
}  // namespace

TEST_CASE("output extents follow the convolution arithmetic of Dumoulin & Visin (2016), relationship 15") {
  for (std::uint64_t i : {5u, 7u, 8u, 16u}) {
    for (std::uint64_t k : {1u, 2u, 3u}) {
      for (std::uint64_t s : {1u, 2u, 3u}) {
        for (std::uint64_t p : {0u, 1u, 2u}) {
          for (std::uint64_t d : {1u, 2u}) {
            if ((k - 1) * d + 1 > i + 2 * p) continue;
            const convolution_map m(convolution(2, 4, {k, 3}), {i, 9}, {{s, 1}, {p, 1}, {d, 1}});
            CAPTURE(i);
            CAPTURE(k);
            CAPTURE(s);
            CAPTURE(p);
            CAPTURE(d);
            CHECK(m.out_extent()[0] == guide_output_size(i, k, s, p, d));
            CHECK(m.out_extent()[1] == guide_output_size(9, 3, 1, 1, 1));
            CHECK(m.out_positions() == m.out_extent()[0] * m.out_extent()[1]);
          }
        }
      }
    }
  }
  // "same" padding keeps the extent at stride 1 (Dumoulin & Visin, sec. 2.2.1: p = floor(k/2) for odd k)
  CHECK(same_padding({3, 5}) == std::vector<std::uint64_t>{1, 2});
  CHECK(same_padding({3}, {2}) == std::vector<std::uint64_t>{2});
  const convolution_map same(convolution(1, 1, {5, 3}), {6, 7}, {{}, same_padding({5, 3}), {}});
  CHECK(same.out_extent() == std::vector<std::uint64_t>{6, 7});
}

TEST_CASE("each output position reads the input positions its taps cover, and padding where they fall outside") {
  // 1-D, input length 5, kernel 3, stride 2, padding 1, dilation 1: outputs at padded
  // positions 0, 2, 4 read input positions (-1, 0, 1), (1, 2, 3), (3, 4, 5).
  const convolution_map m(convolution(1, 1, {3}), {5}, {{2}, {1}, {}});
  REQUIRE(m.out_positions() == 3);
  const std::int64_t expected[3][3] = {{-1, 0, 1}, {1, 2, 3}, {3, 4, -1}};
  for (std::uint64_t p = 0; p < 3; ++p)
    for (std::uint64_t t = 0; t < 3; ++t) CHECK(m.source(p, t) == expected[p][t]);
  // 2-D, dilation 2 along rows on a 5 x 4 input, kernel 2 x 2, no padding: out 3 x 3.
  const convolution_map d(convolution(1, 1, {2, 2}), {5, 4}, {{}, {}, {2, 1}});
  CHECK(d.out_extent() == std::vector<std::uint64_t>{3, 3});
  // output (1, 2) = flat 5: taps (0,0)->(1,2), (0,1)->(1,3), (1,0)->(3,2), (1,1)->(3,3)
  CHECK(d.source(5, 0) == 1 * 4 + 2);
  CHECK(d.source(5, 1) == 1 * 4 + 3);
  CHECK(d.source(5, 2) == 3 * 4 + 2);
  CHECK(d.source(5, 3) == 3 * 4 + 3);
}

TEST_CASE("a placed convolution refuses a kernel larger than the padded input and geometry of the wrong rank") {
  CHECK(mentions(message_of<std::invalid_argument>([] { convolution_map(convolution(1, 1, {7}), {4}, {{}, {1}, {}}); }),
                 "kindling::convolution_map: argument 'conv.kernel' = [7], spanning 7 positions on axis 0 (dilation 1), "
                 "expected a kernel that fits the padded input, 6 (extent 4 + 2 x padding 1)"));
  CHECK(mentions(message_of<std::invalid_argument>([] { convolution_map(convolution(1, 1, {3}), {4}, {{}, {}, {2}}); }),
                 "spanning 5 positions"));
  CHECK(mentions(message_of<std::invalid_argument>([] { convolution_map(convolution(1, 1, {3, 3}), {8}, {}); }),
                 "argument 'in_extent' = [8] has 1 axes, expected 2"));
  CHECK(mentions(message_of<std::invalid_argument>([] { convolution_map(convolution(1, 1, {3}), {8}, {{1, 1}, {}, {}}); }),
                 "argument 'geometry.stride' = [1, 1] has 2 values, expected 1"));
  CHECK(mentions(message_of<std::invalid_argument>([] { convolution_map(convolution(1, 1, {3}), {8}, {{0}, {}, {}}); }),
                 "kindling::convolution_map: argument 'geometry.stride[0]' = 0, expected at least 1"));
  CHECK(mentions(message_of<std::invalid_argument>([] { same_padding({3, 4}); }), "even size 4 on axis 1"));
}
