// Tests of schemes/scheme.hpp: initialize() on layers, packed blocks, regions, element
// types, and the symmetry between units that every random scheme must break.
#include <doctest/doctest.h>

#include <cstring>
#include <set>
#include <vector>

#include "../support/errors.hpp"
#include "../support/stats.hpp"
#include "kindling/eigen.hpp"
#include "kindling/schemes/fixed.hpp"
#include "kindling/schemes/sparse.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;

TEST_CASE("a packed LSTM weight equals its four gate blocks initialized separately") {
  // Each gate block gets its own fans (fan_out = hidden, not 4 hidden) and sub-stream.
  const std::uint64_t in = 24, hidden = 10;
  const auto lstm = packed_dense::lstm(in, hidden);
  const stream s = make_stream(11, "pump.lstm.w_ih");
  std::vector<float> packed(4 * hidden * in);
  initialize(strided_view<float>(packed.data(), shape(4 * hidden, in)), lstm, glorot_uniform{}, s);
  for (std::uint64_t b = 0; b < 4; ++b) {
    std::vector<float> block(hidden * in);
    initialize(strided_view<float>(block.data(), shape(hidden, in)), dense(in, hidden), glorot_uniform{},
               s.indexed(b));
    CHECK(std::memcmp(block.data(), packed.data() + b * hidden * in, block.size() * sizeof(float)) == 0);
  }
  // The block bound uses fan_out = hidden: sqrt(6 / (24 + 10)), not sqrt(6 / (24 + 40)).
  float largest = 0;
  for (float v : packed) largest = std::max(largest, std::abs(v));
  CHECK(largest < std::sqrt(6.0f / 34));
  CHECK(largest > std::sqrt(6.0f / 64));
}

TEST_CASE("a packed weight stored input-major splits its blocks along the second axis") {
  const auto gru = packed_dense::gru(8, 5, weight_layout::in_out);  // weight [8, 15]
  const stream s = make_stream(12, "gru.w");
  std::vector<double> packed(8 * 15);
  initialize(strided_view<double>(packed.data(), shape(8, 15)), gru, he_normal{}, s);
  for (std::uint64_t b = 0; b < 3; ++b) {
    std::vector<double> block(8 * 5);
    initialize(strided_view<double>(block.data(), shape(8, 5)), dense(8, 5, weight_layout::in_out), he_normal{},
               s.indexed(b));
    for (std::uint64_t i = 0; i < 8; ++i)
      for (std::uint64_t j = 0; j < 5; ++j) CHECK(packed[i * 15 + b * 5 + j] == block[i * 5 + j]);
  }
}

TEST_CASE("a shard of a packed weight equals that region of the whole") {
  const auto qkv = packed_dense::fused_qkv(16, 16);  // [48, 16]
  const stream s = make_stream(5, "attn.qkv");
  std::vector<float> whole(48 * 16);
  initialize(strided_view<float>(whole.data(), shape(48, 16)), qkv, glorot_normal{}, s);
  // Rows 10..37 cut blocks 0, 1 and 2; columns 3..12.
  std::vector<float> shard(28 * 10);
  const strided_view<float> part(shard.data(), shape(48, 16), region(shape(10, 3), shape(28, 10)));
  initialize(part, qkv, glorot_normal{}, s);
  for (std::uint64_t r = 0; r < 28; ++r)
    for (std::uint64_t c = 0; c < 10; ++c) CHECK(shard[r * 10 + c] == whole[(r + 10) * 16 + c + 3]);
}

TEST_CASE("every random scheme writes every element type inside its bounds") {
  const dense layer(40, 30);
  const double glorot_bound = std::sqrt(6.0 / 70);
  auto run = [&](auto tag) {
    using E = decltype(tag);
    std::vector<E> w(30 * 40);
    const strided_view<E> v(w.data(), shape(30, 40));
    initialize(v, layer, glorot_uniform{}, make_stream(1, "w"));
    for (const E& x : w) REQUIRE(std::abs(element_traits<E>::to_double(x)) <= glorot_bound);
    initialize(v, layer, fixed_truncated_normal{0.0, 0.1, 2.0}, make_stream(1, "w"));
    const double cut = 2 * 0.1 / 0.8796256610342398;
    for (const E& x : w) REQUIRE(std::abs(element_traits<E>::to_double(x)) <= cut);
    initialize(v, layer, he_normal{}, make_stream(1, "w"));
    initialize(v, layer, sparse{5, 0.5}, make_stream(1, "w"));
    std::size_t nonzero = 0;
    for (const E& x : w) nonzero += element_traits<E>::to_double(x) != 0;
    CHECK(nonzero == 30 * 5);
  };
  SUBCASE("float") { run(float{}); }
  SUBCASE("double") { run(double{}); }
  SUBCASE("float16") { run(float16{}); }
  SUBCASE("bfloat16") { run(bfloat16{}); }
}

TEST_CASE("random schemes break the symmetry between units; names give independent tensors") {
  const dense layer(64, 48);
  const auto rows_distinct = [](const std::vector<double>& w, std::size_t rows, std::size_t cols) {
    std::set<std::vector<double>> seen;
    for (std::size_t r = 0; r < rows; ++r) {
      const auto at = w.begin() + static_cast<std::ptrdiff_t>(r * cols);
      seen.insert(std::vector<double>(at, at + static_cast<std::ptrdiff_t>(cols)));
    }
    return seen.size() == rows;
  };
  std::vector<double> a(48 * 64), b(48 * 64), c(48 * 64);
  const auto fill_with = [&](std::vector<double>& w, const char* name) {
    initialize(strided_view<double>(w.data(), shape(48, 64)), layer, he_uniform{}, make_stream(9, name));
  };
  fill_with(a, "enc.w");
  fill_with(b, "enc.w");
  fill_with(c, "dec.w");
  CHECK(rows_distinct(a, 48, 64));
  CHECK(a == b);  // same seed and name: the same tensor
  // Independent tensors: |r| < 5/sqrt(n) fails with probability ~6e-7 if independent.
  CHECK(std::abs(kindling_test::correlation(a, c)) < 5 / std::sqrt(3072.0));
}

TEST_CASE("initialize names the layer's expected shape when the view does not fit") {
  std::vector<float> w(20, 1.0f);
  const std::string msg = kindling_test::message_of<std::invalid_argument>([&] {
    initialize(strided_view<float>(w.data(), shape(4, 5)), dense(4, 5), glorot_uniform{}, make_stream(1, "w"));
  });
  CHECK_MESSAGE(kindling_test::mentions(msg, "shape"), msg);
  for (float x : w) CHECK(x == 1.0f);
}

TEST_CASE("initialize takes Eigen objects directly, as fill does, with the values of their views") {
  using row_major = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  const stream s = make_stream(5, "belt.encoder.w");
  row_major reference(10, 6);
  initialize(view_of(reference), dense(6, 10), he_normal{}, s);
  SUBCASE("a column-major matrix, on two threads") {
    Eigen::MatrixXf w(10, 6);
    initialize(w, dense(6, 10), he_normal{}, s, thread_executor(2));
    CHECK(w == reference);
  }
  SUBCASE("a block of a bigger matrix, with fans given as weight_info") {
    Eigen::MatrixXf big = Eigen::MatrixXf::Zero(12, 9);
    initialize(big.block(1, 2, 10, 6), weight_info{fans{6, 10, 1}, weight_layout::out_in}, he_normal{}, s);
    CHECK(big.block(1, 2, 10, 6) == reference);
    CHECK(big.col(0).isZero());
  }
  SUBCASE("a packed GRU weight through a Map") {
    std::vector<float> memory(15 * 4), plain(15 * 4);
    initialize(Eigen::Map<row_major>(memory.data(), 15, 4), packed_dense::gru(4, 5), glorot_uniform{}, s);
    initialize(strided_view<float>(plain.data(), shape(15, 4)), packed_dense::gru(4, 5), glorot_uniform{}, s);
    CHECK(memory == plain);
  }
}

TEST_CASE("weight_info_of reads a layer's fans and layout after checking the shape") {
  const convolution conv(6, 9, {3, 5}, 3, weight_layout::spatial_in_out);
  const weight_info w = weight_info_of(conv, shape(3, 5, 2, 9));  // [k0, k1, in/groups, out]
  CHECK(w.fans == conv.layer_fans());
  CHECK(w.layout == weight_layout::spatial_in_out);
  const std::string m = kindling_test::message_of<std::invalid_argument>([&] { (void)weight_info_of(conv, shape(9, 2, 3, 5)); });
  CHECK_MESSAGE(kindling_test::mentions(m, "argument 'shape' = [9, 2, 3, 5], expected"), m);
  CHECK(weight_info_of(embedding(1000, 16), shape(1000, 16)).layout == weight_layout::out_in);
}

TEST_CASE("packed_block_view gives the part of a view inside one block, as a weight of its own") {
  const packed_dense gru = packed_dense::gru(4, 5);  // [15, 4]: three 5 x 4 blocks along axis 0
  std::vector<float> memory(15 * 4);
  const strided_view<float> whole(memory.data(), shape(15, 4));
  const packed_block b1 = gru.block(1);
  strided_view<float> part = whole;
  REQUIRE(packed_block_view(whole, b1, &part));
  CHECK(part.global_shape() == shape(5, 4));
  CHECK(part.is_whole());
  CHECK(part.data() == memory.data() + 5 * 4);
  // Rows 7..12 of the stack: rows 2..4 of block 1.
  const strided_view<float> rows = whole.sub(region(shape(7, 0), shape(6, 4)));
  REQUIRE(packed_block_view(rows, b1, &part));
  CHECK(part.part() == region(shape(2, 0), shape(3, 4)));
  CHECK(part.data() == memory.data() + 7 * 4);
  // A region inside block 0 holds nothing of block 2.
  const strided_view<float> top = whole.sub(region(shape(0, 0), shape(2, 4)));
  strided_view<float> untouched = top;
  CHECK_FALSE(packed_block_view(top, gru.block(2), &untouched));
  CHECK(untouched.data() == top.data());
}
