// Tests of include/kindling/fan.hpp.
//
// The definition checked (Glorot & Bengio, AISTATS 2010; He et al., ICCV 2015 sec. 2.2):
// fan-in is the number of weights that connect to one output unit, fan-out the number
// of weights through which one input unit feeds the layer.  For convolutions the fans
// are counted per channel over the kernel footprint (stride 1, interior units); the
// per-group counts and the transposed-convolution convention are common practice.
// Instead of restating the formulas, the convolution tests decode every element of the
// weight tensor from its axis order, find the input and output channel it connects,
// and count -- an independent route to the same numbers.
#include <doctest/doctest.h>

#include <cstdint>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include "kindling/fan.hpp"

using kindling::fans;
using kindling::weight_layout;
using shape_t = std::vector<std::uint64_t>;

namespace {

// Axis roles of a stored kernel: 'o' output channel axis, 'i' input channel axis,
// 's' a spatial axis.
struct connection_counts {
  std::vector<std::uint64_t> per_output;  // weights reaching each output channel
  std::vector<std::uint64_t> per_input;   // weights leaving each input channel
};

// For a convolution the 'i' axis holds in/groups local channels and output channel o
// belongs to group o / (out/groups); for a transposed convolution the 'o' axis holds
// out/groups local channels and input channel i belongs to group i / (in/groups).
connection_counts count_connections(const shape_t& shape, const std::string& roles,
                                    std::uint64_t in, std::uint64_t out, std::uint64_t groups,
                                    bool transposed) {
  REQUIRE(shape.size() == roles.size());
  connection_counts c{std::vector<std::uint64_t>(out, 0), std::vector<std::uint64_t>(in, 0)};
  std::uint64_t total = 1;
  for (auto s : shape) total *= s;
  for (std::uint64_t flat = 0; flat < total; ++flat) {
    std::uint64_t rest = flat;
    std::uint64_t o_axis = 0;
    std::uint64_t i_axis = 0;
    for (std::size_t a = shape.size(); a-- > 0;) {  // row-major: last axis fastest
      const std::uint64_t idx = rest % shape[a];
      rest /= shape[a];
      if (roles[a] == 'o') o_axis = idx;
      if (roles[a] == 'i') i_axis = idx;
    }
    std::uint64_t o = o_axis;
    std::uint64_t i = i_axis;
    if (transposed) {
      o = i_axis / (in / groups) * (out / groups) + o_axis;
    } else {
      i = o_axis / (out / groups) * (in / groups) + i_axis;
    }
    ++c.per_output[o];
    ++c.per_input[i];
  }
  return c;
}

// Every output channel has the same number of incoming weights (= fan_in) and every
// input channel the same number of outgoing ones (= fan_out).
void check_counts(const connection_counts& c, const fans& f) {
  for (auto n : c.per_output) CHECK_MESSAGE(n == f.fan_in, "each output unit has fan_in weights");
  for (auto n : c.per_input) CHECK_MESSAGE(n == f.fan_out, "each input unit has fan_out weights");
}

template <class F>
std::string error_of(F&& f) {
  try {
    f();
  } catch (const std::invalid_argument& e) {
    return e.what();
  }
  return "no std::invalid_argument thrown";
}

bool contains(const std::string& s, const std::string& part) {
  return s.find(part) != std::string::npos;
}

}  // namespace

TEST_CASE("dense layers have fan_in = inputs and fan_out = outputs in either storage order") {
  SUBCASE("out_in (default): weight [out, in]") {
    const kindling::dense d(300, 100);
    CHECK(d.weight_shape() == shape_t{100, 300});
    CHECK(d.layer_fans() == fans{300, 100, 1});
    CHECK_NOTHROW(d.check_shape({100, 300}));
  }
  SUBCASE("in_out: weight [in, out]") {
    const kindling::dense d(300, 100, weight_layout::in_out);
    CHECK(d.weight_shape() == shape_t{300, 100});
    CHECK(d.layer_fans() == fans{300, 100, 1});
    CHECK_NOTHROW(d.check_shape({300, 100}));
    const std::string e = error_of([&] { d.check_shape({100, 300}); });
    CHECK_MESSAGE(contains(e, "argument 'shape' = [100, 300]"), e);
    CHECK_MESSAGE(contains(e, "expected 300 in dimension 0 (in_features)"), e);
  }
}

TEST_CASE("convolution fans count in/groups and out/groups channels over the kernel") {
  struct layout_case {
    weight_layout layout;
    const char* roles_2d;
  };
  // OIHW-like, HWIO-like, OHWI-like
  const layout_case layouts[] = {{weight_layout::out_in_spatial, "oiss"},
                                 {weight_layout::spatial_in_out, "ssio"},
                                 {weight_layout::out_spatial_in, "ossi"}};
  for (const auto& lc : layouts) {
    CAPTURE(kindling::layout_name(lc.layout));
    SUBCASE("2-D, groups = 1: fan_in = in k0 k1, fan_out = out k0 k1 (He et al. 2015)") {
      const kindling::convolution c(3, 8, {3, 5}, 1, lc.layout);
      CHECK(c.layer_fans() == fans{3 * 15, 8 * 15, 15});
      check_counts(count_connections(c.weight_shape(), lc.roles_2d, 3, 8, 1, false), c.layer_fans());
      CHECK_NOTHROW(c.check_shape(c.weight_shape()));
    }
    SUBCASE("1-D and 3-D kernels") {
      std::string roles1 = lc.roles_2d;
      roles1.erase(roles1.find('s'), 1);
      std::string roles3 = lc.roles_2d;
      roles3.insert(roles3.find('s'), "s");
      const kindling::convolution c1(4, 6, {7}, 1, lc.layout);
      CHECK(c1.layer_fans() == fans{28, 42, 7});
      check_counts(count_connections(c1.weight_shape(), roles1, 4, 6, 1, false), c1.layer_fans());
      const kindling::convolution c3(2, 4, {3, 2, 2}, 2, lc.layout);
      CHECK(c3.layer_fans() == fans{1 * 12, 2 * 12, 12});
      check_counts(count_connections(c3.weight_shape(), roles3, 2, 4, 2, false), c3.layer_fans());
    }
    SUBCASE("grouped: 6 -> 9 channels in 3 groups") {
      const kindling::convolution c(6, 9, {3, 3}, 3, lc.layout);
      CHECK(c.layer_fans() == fans{2 * 9, 3 * 9, 9});
      check_counts(count_connections(c.weight_shape(), lc.roles_2d, 6, 9, 3, false), c.layer_fans());
    }
    SUBCASE("depthwise: 5 channels, multiplier 2") {
      const auto c = kindling::convolution::depthwise(5, 2, {3, 3}, lc.layout);
      CHECK(c.groups() == 5);
      CHECK(c.out_channels() == 10);
      CHECK(c.layer_fans() == fans{9, 18, 9});
      check_counts(count_connections(c.weight_shape(), lc.roles_2d, 5, 10, 5, false), c.layer_fans());
    }
  }
  SUBCASE("the stored shapes follow the layout names") {
    CHECK(kindling::convolution(6, 9, {3, 5}, 3).weight_shape() == shape_t{9, 2, 3, 5});
    CHECK(kindling::convolution(6, 9, {3, 5}, 3, weight_layout::spatial_in_out).weight_shape() ==
          shape_t{3, 5, 2, 9});
    CHECK(kindling::convolution(6, 9, {3, 5}, 3, weight_layout::out_spatial_in).weight_shape() ==
          shape_t{9, 3, 5, 2});
  }
}

TEST_CASE("transposed convolution fans are those of its own forward pass, not swapped") {
  SUBCASE("in_out_spatial [in, out/g, k...]: fan_in = in/g rf, fan_out = out/g rf") {
    const kindling::transposed_convolution t(16, 4, {4, 4});
    CHECK(t.weight_shape() == shape_t{16, 4, 4, 4});
    CHECK(t.layer_fans() == fans{16 * 16, 4 * 16, 16});
    check_counts(count_connections(t.weight_shape(), "ioss", 16, 4, 1, true), t.layer_fans());
    // The pitfall: reading the same tensor as a convolution's [out, in/g, k...].
    const fans misread = kindling::fans_from_shape(t.weight_shape(), weight_layout::out_in_spatial);
    CHECK_MESSAGE(misread != t.layer_fans(), "the convolution reading swaps the fans");
    CHECK(misread == fans{4 * 16, 16 * 16, 16});
  }
  SUBCASE("grouped, 1-D and 3-D, spatial_out_in [k..., out/g, in]") {
    const kindling::transposed_convolution t(6, 4, {3}, 2, weight_layout::spatial_out_in);
    CHECK(t.weight_shape() == shape_t{3, 2, 6});
    CHECK(t.layer_fans() == fans{3 * 3, 2 * 3, 3});
    check_counts(count_connections(t.weight_shape(), "soi", 6, 4, 2, true), t.layer_fans());
    const kindling::transposed_convolution t3(4, 6, {2, 3, 2}, 2);
    CHECK(t3.weight_shape() == shape_t{4, 3, 2, 3, 2});
    check_counts(count_connections(t3.weight_shape(), "iosss", 4, 6, 2, true), t3.layer_fans());
  }
}

TEST_CASE("an embedding table has fan_in = dimension and fan_out = vocabulary") {
  // Our convention (fan.hpp): the fans of the tied output projection [out = vocabulary,
  // in = dimension].
  const kindling::embedding e(50000, 256);
  CHECK(e.weight_shape() == shape_t{50000, 256});
  CHECK(e.layer_fans() == fans{256, 50000, 1});
  CHECK(e.layer_fans() == kindling::dense(256, 50000).layer_fans());
  const std::string err = error_of([&] { e.check_shape({256, 50000}); });
  CHECK_MESSAGE(contains(err, "expected 50000 in dimension 0 (vocabulary)"), err);
}

TEST_CASE("packed gate blocks each get the fans of one block, at their own offset") {
  SUBCASE("LSTM: 4 blocks of [hidden, input] stacked along axis 0") {
    const auto p = kindling::packed_dense::lstm(10, 32);
    CHECK(p.weight_shape() == shape_t{128, 10});
    CHECK(p.layer_fans() == fans{10, 32, 1});
    const auto blocks = p.all_blocks();
    REQUIRE(blocks.size() == 4);
    for (std::uint64_t b = 0; b < 4; ++b) {
      CHECK(blocks[b].index == b);
      CHECK(blocks[b].axis == 0);
      CHECK(blocks[b].offset == 32 * b);
      CHECK(blocks[b].shape == shape_t{32, 10});
      CHECK_MESSAGE((blocks[b].block_fans == fans{10, 32, 1}), "fan_out is 32, not 4 * 32");
    }
  }
  SUBCASE("GRU recurrent weights in_out: 3 blocks of [hidden, hidden] along axis 1") {
    const auto p = kindling::packed_dense::gru(20, 20, weight_layout::in_out);
    CHECK(p.weight_shape() == shape_t{20, 60});
    const auto blocks = p.all_blocks();
    REQUIRE(blocks.size() == 3);
    for (std::uint64_t b = 0; b < 3; ++b) {
      CHECK(blocks[b].axis == 1);
      CHECK(blocks[b].offset == 20 * b);
      CHECK(blocks[b].shape == shape_t{20, 20});
      CHECK(blocks[b].block_fans == fans{20, 20, 1});
    }
  }
  SUBCASE("fused QKV: 3 projections of width 64 from 512") {
    const auto p = kindling::packed_dense::fused_qkv(512, 64);
    CHECK(p.weight_shape() == shape_t{192, 512});
    CHECK(p.block(2).offset == 128);
    CHECK(p.block(2).block_fans == fans{512, 64, 1});
    CHECK_NOTHROW(p.check_shape({192, 512}));
    const std::string e = error_of([&] { p.check_shape({64, 512}); });
    CHECK_MESSAGE(contains(e, "expected 192 in dimension 0 (blocks*block_out_features)"), e);
    const std::string eb = error_of([&] { (void)p.block(3); });
    CHECK_MESSAGE(contains(eb, "argument 'b' = 3, expected a block index below 3"), eb);
  }
}

TEST_CASE("fans_from_shape agrees with the layer descriptions for every layout") {
  const kindling::convolution c(6, 9, {3, 5}, 3);
  const kindling::convolution c_hwio(6, 9, {3, 5}, 3, weight_layout::spatial_in_out);
  const kindling::convolution c_ohwi(6, 9, {3, 5}, 3, weight_layout::out_spatial_in);
  const kindling::transposed_convolution t(6, 9, {3, 5}, 3);
  const kindling::transposed_convolution t_hwoi(6, 9, {3, 5}, 3, weight_layout::spatial_out_in);
  CHECK(kindling::fans_from_shape({100, 300}, weight_layout::out_in) == fans{300, 100, 1});
  CHECK(kindling::fans_from_shape({300, 100}, weight_layout::in_out) == fans{300, 100, 1});
  CHECK(kindling::fans_from_shape(c.weight_shape(), c.layout(), 3) == c.layer_fans());
  CHECK(kindling::fans_from_shape(c_hwio.weight_shape(), c_hwio.layout(), 3) == c_hwio.layer_fans());
  CHECK(kindling::fans_from_shape(c_ohwi.weight_shape(), c_ohwi.layout(), 3) == c_ohwi.layer_fans());
  CHECK(kindling::fans_from_shape(t.weight_shape(), t.layout(), 3) == t.layer_fans());
  CHECK(kindling::fans_from_shape(t_hwoi.weight_shape(), t_hwoi.layout(), 3) == t_hwoi.layer_fans());
}

TEST_CASE("bad descriptions and shapes are refused with the argument named") {
  SUBCASE("zero sizes") {
    CHECK(contains(error_of([] { kindling::dense(0, 3); }), "argument 'in_features' = 0"));
    CHECK(contains(error_of([] { kindling::convolution(3, 4, {3, 0}); }),
                   "argument 'kernel' = [3, 0], expected positive sizes (size 0 in spatial dimension 1)"));
    CHECK(contains(error_of([] { kindling::embedding(10, 0); }), "argument 'dimension' = 0"));
    CHECK(contains(error_of([] { kindling::packed_dense(0, 3, 3); }), "argument 'blocks' = 0"));
    CHECK(contains(error_of([] { kindling::convolution::depthwise(4, 0, {3}); }),
                   "argument 'multiplier' = 0"));
    CHECK(contains(error_of([] { (void)kindling::fans_from_shape({3, 0, 3}, weight_layout::out_in_spatial); }),
                   "argument 'shape' = [3, 0, 3], expected positive sizes (size 0 in dimension 1)"));
  }
  SUBCASE("channels not divisible by groups") {
    CHECK(contains(error_of([] { kindling::convolution(6, 8, {3}, 4); }),
                   "kindling::convolution: argument 'in_channels' = 6, expected a multiple of groups = 4"));
    CHECK(contains(error_of([] { kindling::transposed_convolution(8, 6, {3}, 4); }),
                   "argument 'out_channels' = 6, expected a multiple of groups = 4"));
    CHECK(contains(error_of([] { (void)kindling::fans_from_shape({6, 2, 3}, weight_layout::out_in_spatial, 4); }),
                   "expected a multiple of groups = 4"));
  }
  SUBCASE("kernel rank and layout") {
    CHECK(contains(error_of([] { kindling::convolution(3, 4, {}); }),
                   "argument 'kernel' = [], expected 1, 2 or 3 spatial dimensions (it has 0)"));
    CHECK(contains(error_of([] { kindling::convolution(3, 4, {1, 1, 1, 1}); }),
                   "expected 1, 2 or 3 spatial dimensions (it has 4)"));
    CHECK(contains(error_of([] { kindling::dense(3, 4, weight_layout::out_in_spatial); }),
                   "argument 'layout' = out_in_spatial, expected out_in or in_out"));
    CHECK(contains(error_of([] { kindling::transposed_convolution(3, 4, {3}, 1, weight_layout::out_in_spatial); }),
                   "expected in_out_spatial or spatial_out_in"));
    CHECK(contains(error_of([] { (void)kindling::fans_from_shape({3, 4, 5}, weight_layout::out_in); }),
                   "argument 'shape' = [3, 4, 5], expected rank 2 for layout out_in (it has rank 3)"));
    CHECK(contains(error_of([] { (void)kindling::fans_from_shape({3, 4}, weight_layout::spatial_in_out); }),
                   "expected rank 3 to 5 for layout spatial_in_out (it has rank 2)"));
  }
  SUBCASE("an actual shape that does not fit the layout") {
    const kindling::convolution c(6, 9, {3, 5}, 3);
    const std::string rank = error_of([&] { c.check_shape({9, 2, 15}); });
    CHECK_MESSAGE(contains(rank, "argument 'shape' = [9, 2, 15], expected rank 4"), rank);
    CHECK_MESSAGE(contains(rank, "[out_channels, in_channels/groups, k0, k1] = [9, 2, 3, 5]"), rank);
    const std::string dim = error_of([&] { c.check_shape({9, 6, 3, 5}); });
    CHECK_MESSAGE(contains(dim, "expected 2 in dimension 1 (in_channels/groups)"), dim);
  }
}

TEST_CASE("fan products beyond 2^53 throw std::length_error") {
  const std::uint64_t big = std::uint64_t{1} << 30;
  CHECK_THROWS_AS(kindling::dense(big, big), std::length_error);  // 2^60 weights
  CHECK_THROWS_AS(kindling::convolution(big, 1, {big}), std::length_error);
  CHECK_THROWS_AS(kindling::packed_dense(4, 1, std::numeric_limits<std::uint64_t>::max()),
                  std::length_error);
  CHECK_THROWS_AS((void)kindling::fans_from_shape({big, big, 2}, weight_layout::out_in_spatial),
                  std::length_error);
  std::string message = "no std::length_error thrown";
  try {
    kindling::embedding(big, big);
  } catch (const std::length_error& e) {
    message = e.what();
  }
  CHECK_MESSAGE(contains(message, "vocabulary * dimension"), message);
  CHECK_NOTHROW(kindling::dense(std::uint64_t{1} << 26, std::uint64_t{1} << 27));  // exactly 2^53
}
