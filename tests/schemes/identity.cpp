// Tests of schemes/identity.hpp: gain times the identity, dense and convolution forms.
#include "kindling/schemes/identity.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"
#include "../support/gain_refusal.hpp"
#include "../support/layer_fill.hpp"

#include <cstdint>
#include <limits>
#include <string>
#include <vector>

namespace {

using kindling_test::as_double;
using kindling_test::mentions;
using kindling_test::message_of;
using namespace kindling;

template <class E, class Layer>
std::vector<E> identity_of(const shape& global, const Layer& layer, double gain = 1) {
  return kindling_test::filled<E>(global, layer, kindling::identity{gain}, kindling::make_stream(0, "unused"));
}

// A convolution with zero padding of floor(k/2) before and k - 1 - floor(k/2) after each
// spatial axis (the usual 'same' padding), stride 1, written from the layout definitions
// in fan.hpp: output channel o of group g = o / (out/groups) sums over the in/groups
// channels of that group and every kernel tap. x is [in_channels, spatial...] row-major.
struct conv_setup {
  std::uint64_t in, out, groups;
  std::vector<std::uint64_t> kernel;
  weight_layout layout;
};

std::vector<double> conv_same(const conv_setup& c, const std::vector<double>& w, const std::vector<double>& x,
                              const std::vector<std::uint64_t>& space) {
  const std::size_t dims = c.kernel.size();
  const std::uint64_t in_g = c.in / c.groups, out_g = c.out / c.groups;
  std::uint64_t taps = 1, points = 1;
  for (std::size_t d = 0; d < dims; ++d) {
    taps *= c.kernel[d];
    points *= space[d];
  }
  auto weight = [&](std::uint64_t o, std::uint64_t j, std::uint64_t t) {
    switch (c.layout) {
      case weight_layout::spatial_in_out: return w[static_cast<std::size_t>((t * in_g + j) * c.out + o)];
      case weight_layout::out_spatial_in: return w[static_cast<std::size_t>((o * taps + t) * in_g + j)];
      default: return w[static_cast<std::size_t>((o * in_g + j) * taps + t)];
    }
  };
  std::vector<double> y(static_cast<std::size_t>(c.out * points), 0.0);
  for (std::uint64_t o = 0; o < c.out; ++o) {
    const std::uint64_t group = o / out_g;
    for (std::uint64_t p = 0; p < points; ++p) {
      double sum = 0;
      for (std::uint64_t j = 0; j < in_g; ++j) {
        for (std::uint64_t t = 0; t < taps; ++t) {
          // Position p + tap - floor(k/2) along each axis, in row-major digit order.
          std::uint64_t pr = p, tr = t, at = 0, scale = 1;
          bool inside = true;
          for (std::size_t d = dims; d-- > 0;) {
            const auto pos = static_cast<std::int64_t>(pr % space[d]) + static_cast<std::int64_t>(tr % c.kernel[d]) -
                             static_cast<std::int64_t>(c.kernel[d] / 2);
            pr /= space[d];
            tr /= c.kernel[d];
            if (pos < 0 || pos >= static_cast<std::int64_t>(space[d])) inside = false;
            at += static_cast<std::uint64_t>(pos) * scale;
            scale *= space[d];
          }
          if (inside) sum += weight(o, j, t) * x[static_cast<std::size_t>((group * in_g + j) * points + at)];
        }
      }
      y[static_cast<std::size_t>(o * points + p)] = sum;
    }
  }
  return y;
}


}  // namespace

TEST_CASE("identity: a dense weight is gain times the identity, rectangular ones a rectangular eye") {
  SUBCASE("square, every element type") {
    const std::vector<float> f = identity_of<float>({5, 5}, kindling::dense(5, 5), 0.5);
    const std::vector<double> d = identity_of<double>({5, 5}, kindling::dense(5, 5), 0.5);
    const std::vector<kindling::float16> h = identity_of<kindling::float16>({5, 5}, kindling::dense(5, 5), 0.5);
    const std::vector<kindling::bfloat16> b = identity_of<kindling::bfloat16>({5, 5}, kindling::dense(5, 5), 0.5);
    for (std::size_t r = 0; r < 5; ++r) {
      for (std::size_t c = 0; c < 5; ++c) {
        const double want = r == c ? 0.5 : 0.0;
        CHECK(f[r * 5 + c] == want);
        CHECK(d[r * 5 + c] == want);
        CHECK(as_double(h[r * 5 + c]) == want);
        CHECK(as_double(b[r * 5 + c]) == want);
      }
    }
  }
  SUBCASE("tall and wide [out, in]: ones where out index == in index") {
    const std::vector<float> tall = identity_of<float>({6, 3}, kindling::dense(3, 6));
    const std::vector<float> wide = identity_of<float>({3, 6}, kindling::dense(6, 3));
    for (std::size_t r = 0; r < 6; ++r)
      for (std::size_t c = 0; c < 3; ++c) {
        CHECK(tall[r * 3 + c] == (r == c ? 1.0f : 0.0f));
        CHECK(wide[c * 6 + r] == (r == c ? 1.0f : 0.0f));
      }
  }
  SUBCASE("layout in_out stores the transpose, so y = W^T x is still x") {
    const std::vector<double> w = identity_of<double>({4, 7}, kindling::dense(4, 7, weight_layout::in_out));
    for (std::size_t i = 0; i < 4; ++i)
      for (std::size_t o = 0; o < 7; ++o) CHECK(w[i * 7 + o] == (i == o ? 1.0 : 0.0));
  }
}

TEST_CASE("identity: a convolution kernel applied with 'same' padding reproduces its input") {
  const std::vector<conv_setup> setups = {
      {3, 3, 1, {3, 3}, weight_layout::out_in_spatial},
      {4, 4, 1, {5}, weight_layout::spatial_in_out},
      {2, 2, 1, {3, 3, 3}, weight_layout::out_spatial_in},
      {6, 6, 2, {3, 3}, weight_layout::out_in_spatial},   // two groups of 3: the identity of each group
      {5, 5, 5, {3, 3}, weight_layout::spatial_in_out},   // depthwise
      {3, 3, 1, {4, 2}, weight_layout::out_in_spatial},   // even sizes: tap floor(k/2), padding floor(k/2) before
  };
  for (const conv_setup& c : setups) {
    const kindling::convolution conv(c.in, c.out, c.kernel, c.groups, c.layout);
    const std::vector<std::uint64_t> ws = conv.weight_shape();
    const shape global(ws.begin(), ws.end());
    CAPTURE(global.text());
    CAPTURE(c.groups);
    const std::vector<float> w = identity_of<float>(global, conv);
    const std::vector<double> wd(w.begin(), w.end());

    // A pseudo-random input (a fill of the library's own normal, any values would do).
    std::vector<std::uint64_t> space(c.kernel.size(), 6);
    std::uint64_t points = 1;
    for (std::uint64_t s : space) points *= s;
    std::vector<double> x(static_cast<std::size_t>(c.in * points));
    kindling::fill(strided_view<double>(x.data(), shape{c.in, points}), kindling::dist::normal{0, 1},
                   kindling::make_stream(1, "input"));
    CHECK_MESSAGE(conv_same(c, wd, x, space) == x, "expected the identity kernel to copy its input exactly");

    // And with a gain every output is gain * input (exact: the gain is a power of two).
    const std::vector<double> w4 = identity_of<double>(global, conv, 4.0);
    std::vector<double> x4 = x;
    for (double& v : x4) v *= 4;
    CHECK(conv_same(c, w4, x, space) == x4);
  }
}

TEST_CASE("identity: the convolution form is zero at every tap but the centre") {
  const kindling::convolution conv(4, 4, {3, 5});
  const std::vector<double> w = identity_of<double>({4, 4, 3, 5}, conv, 2.0);
  int nonzero = 0;
  for (std::size_t o = 0; o < 4; ++o)
    for (std::size_t j = 0; j < 4; ++j)
      for (std::size_t t = 0; t < 15; ++t) {
        const double v = w[(o * 4 + j) * 15 + t];
        if (v != 0) {
          ++nonzero;
          CHECK(t == 1 * 5 + 2);  // the centre (1, 2) of a 3 x 5 kernel
          CHECK(o == j);
          CHECK(v == 2.0);
        }
      }
  CHECK(nonzero == 4);
}

TEST_CASE("identity: a region of the weight equals that part of the whole") {
  const kindling::convolution conv(8, 8, {3, 3}, 1, weight_layout::spatial_in_out);
  const shape global{3, 3, 8, 8};
  const std::vector<float> whole = identity_of<float>(global, conv);
  const kindling::region part({1, 0, 2, 3}, {2, 3, 4, 5});
  std::vector<float> shard(2 * 3 * 4 * 5, -1.0f);
  kindling::initialize(strided_view<float>(shard.data(), global, part), conv, kindling::identity{},
                       kindling::make_stream(0, "unused"));
  bool same = true;
  for (std::size_t a = 0; a < 2; ++a)
    for (std::size_t b = 0; b < 3; ++b)
      for (std::size_t c = 0; c < 4; ++c)
        for (std::size_t d = 0; d < 5; ++d)
          same = same && shard[((a * 3 + b) * 4 + c) * 5 + d] == whole[(((1 + a) * 3 + b) * 8 + 2 + c) * 8 + 3 + d];
  CHECK(same);
}

TEST_CASE("identity: bad input throws a clear error before anything is written") {
  const auto st = kindling::make_stream(0, "unused");
  kindling_test::guarded_memory<float> memory(96, 3.0f);

  SUBCASE("a non-finite gain") {
    kindling_test::check_non_finite_gains_refused("identity", [&](double gain) {
      kindling::initialize(strided_view<float>(memory.data(), shape{8, 12}), kindling::dense(12, 8),
                           kindling::identity{gain}, st);
    });
  }
  SUBCASE("a convolution whose output and input channels differ") {
    const std::string m = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{6, 4, 2, 2}), kindling::convolution(4, 6, {2, 2}),
                           kindling::identity{}, st);
    });
    CHECK_MESSAGE(mentions(m, "argument 'shape' = [6, 4, 2, 2], expected out_channels == in_channels"), m);
    CHECK(mentions(m, "expected out_channels == in_channels"));
  }
  SUBCASE("a grouped convolution whose groups are not square") {
    // 8 outputs, 4 inputs, 2 groups: each group maps 2 channels to 4.
    const std::string m = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{8, 2, 2, 3}), kindling::convolution(4, 8, {2, 3}, 2),
                           kindling::identity{}, st);
    });
    CHECK_MESSAGE(mentions(m, "8 output channels and 4 input channels (2 groups)"), m);
  }
  SUBCASE("a rank-1 tensor, a rank-3 dense weight, a transposed convolution layout") {
    const std::string r1 = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{96}), weight_info{}, kindling::identity{}, st);
    });
    CHECK_MESSAGE(mentions(r1, "argument 'shape' = [96], expected rank 2 for layout out_in"), r1);
    const std::string r3 = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{4, 4, 6}), weight_info{}, kindling::identity{}, st);
    });
    CHECK_MESSAGE(mentions(r3, "expected rank 2"), r3);
    const std::string t = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{4, 4, 6}),
                           weight_info{kindling::fans{24, 24, 6}, weight_layout::in_out_spatial}, kindling::identity{}, st);
    });
    CHECK_MESSAGE(mentions(t, "argument 'layout' = in_out_spatial"), t);
  }
  SUBCASE("fans that do not describe the convolution") {
    const std::string m = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{4, 4, 6}),
                           weight_info{kindling::fans{4, 4, 1}, weight_layout::out_in_spatial}, kindling::identity{}, st);
    });
    CHECK_MESSAGE(mentions(m, "argument 'fans' = (fan_in 4, fan_out 4, receptive_field 1)"), m);
    CHECK(mentions(m, "expected receptive_field 6, fan_in 24"));
  }
  CHECK_MESSAGE(memory.untouched(), "expected the memory unchanged after a failed call");
}
