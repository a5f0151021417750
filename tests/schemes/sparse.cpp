// Tests of schemes/sparse.hpp (Martens, ICML 2010: k nonzero incoming weights a unit).
#include <doctest/doctest.h>

#include <set>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/schemes/sparse.hpp"

using namespace kindling;

TEST_CASE("sparse gives every unit exactly k nonzero incoming weights, in any layout") {
  SUBCASE("dense, output-major") {
    std::vector<float> w(50 * 200);
    initialize(strided_view<float>(w.data(), shape(50, 200)), dense(200, 50), sparse{15, 1.0}, make_stream(1, "w"));
    for (std::size_t o = 0; o < 50; ++o) {
      int n = 0;
      for (std::size_t i = 0; i < 200; ++i) n += w[o * 200 + i] != 0.0f;
      CHECK(n == 15);
    }
  }
  SUBCASE("dense, input-major") {
    std::vector<float> w(200 * 50);
    initialize(strided_view<float>(w.data(), shape(200, 50)), dense(200, 50, weight_layout::in_out),
               sparse{15, 1.0}, make_stream(1, "w"));
    for (std::size_t o = 0; o < 50; ++o) {
      int n = 0;
      for (std::size_t i = 0; i < 200; ++i) n += w[i * 50 + o] != 0.0f;
      CHECK(n == 15);
    }
  }
  SUBCASE("convolution, spatial-input-output") {
    const convolution conv(6, 8, {3, 3}, 1, weight_layout::spatial_in_out);  // [3, 3, 6, 8]
    std::vector<double> w(3 * 3 * 6 * 8);
    initialize(strided_view<double>(w.data(), shape(3, 3, 6, 8)), conv, sparse{4, 1.0}, make_stream(1, "w"));
    for (std::size_t o = 0; o < 8; ++o) {
      int n = 0;
      for (std::size_t j = 0; j < 54; ++j) n += w[j * 8 + o] != 0.0;
      CHECK(n == 4);
    }
  }
}

TEST_CASE("sparse positions differ between units and a shard matches the whole") {
  std::vector<float> w(40 * 100);
  const stream s = make_stream(2, "w");
  initialize(strided_view<float>(w.data(), shape(40, 100)), dense(100, 40), sparse{3, 1.0}, s);
  std::set<std::vector<bool>> patterns;
  for (std::size_t o = 0; o < 40; ++o) {
    std::vector<bool> p(100);
    for (std::size_t i = 0; i < 100; ++i) p[i] = w[o * 100 + i] != 0.0f;
    patterns.insert(p);
  }
  // C(100, 3) = 161700 patterns; 40 units share one with probability below 0.5%.
  CHECK(patterns.size() == 40);
  std::vector<float> shard(17 * 31);
  initialize(strided_view<float>(shard.data(), shape(40, 100), region(shape(5, 60), shape(17, 31))), dense(100, 40),
             sparse{3, 1.0}, s);
  for (std::size_t r = 0; r < 17; ++r)
    for (std::size_t c = 0; c < 31; ++c) CHECK(shard[r * 31 + c] == w[(r + 5) * 100 + c + 60]);
}

TEST_CASE("sparse with k larger than the fan-in is an error and writes nothing") {
  std::vector<float> w(4 * 10, 3.0f);
  const std::string msg = kindling_test::message_of<std::invalid_argument>([&] {
    initialize(strided_view<float>(w.data(), shape(4, 10)), dense(10, 4), sparse{11, 1.0}, make_stream(1, "w"));
  });
  CHECK_MESSAGE(kindling_test::mentions(msg, "'nonzero' = 11"), msg);
  CHECK_MESSAGE(kindling_test::mentions(msg, "1 to 10"), msg);
  for (float x : w) CHECK(x == 3.0f);
  CHECK_THROWS_AS(initialize(strided_view<float>(w.data(), shape(4, 10)), dense(10, 4), sparse{2, -1.0},
                             make_stream(1, "w")),
                  std::domain_error);
}

TEST_CASE("a sparse shard across units of an input-major weight matches the whole") {
  // The unit axis is the last one here, so a shard's units start at its column offset.
  const stream s = make_stream(3, "w");
  std::vector<float> w(60 * 40);
  initialize(strided_view<float>(w.data(), shape(60, 40)), dense(60, 40, weight_layout::in_out), sparse{5, 1.0}, s);
  std::vector<float> shard(25 * 13);
  initialize(strided_view<float>(shard.data(), shape(60, 40), region(shape(20, 9), shape(25, 13))),
             dense(60, 40, weight_layout::in_out), sparse{5, 1.0}, s);
  bool same = true;
  for (std::size_t r = 0; r < 25; ++r)
    for (std::size_t c = 0; c < 13; ++c) same = same && shard[r * 13 + c] == w[(r + 20) * 40 + c + 9];
  CHECK_MESSAGE(same, "units 9 .. 21 of the shard must hold the whole weight's values");
}
