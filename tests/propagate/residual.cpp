// Tests of residual blocks in propagate/stack.hpp (add_residual), their prediction
// (mean_field.hpp) and their measured passes (measure.hpp).
//
// Sources: Hanin & Rolnick, NeurIPS 2018 (residual streams: without branch scaling the
// second moment grows with depth, a summable series of scales bounds it); Zhang, Dauphin
// & Ma, ICLR 2019 (Fixup: the first m - 1 branch layers scaled by L^(-1/(2m-2)), the last
// zero); Brock, De & Smith, ICLR 2021 (normalizer-free: x + alpha branch(x / beta), from
// memory); He et al., ICCV 2015 (He weights keep E[h^2] through ReLU).  The recursion is
// derived beside predict(): for a branch independent of the stream and zero-mean last
// weights, Var(x_{l+1}) = Var(x_l) + s^2 Var(branch(x_l)).
#include "kindling/propagate/measure.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <cmath>

#include <doctest/doctest.h>

#include "../support/errors.hpp"
#include "agreement.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::check_every_row_agrees;
using kindling_test::message_of;

namespace {
// A He branch of a ReLU layer and a linear He layer: E[branch(x)^2] = 2 E[x^2]
// (layer 1: q = 2 E[x^2], E[relu^2] = q / 2; layer 2: 2 / fan_in times fan_in E[a^2]).
layer_stack he_branch(std::uint64_t width) {
  layer_stack b(width);
  b.add_dense(width, activation::relu(), he_normal{}).add_dense(width, activation::identity(), he_normal{});
  return b;
}

layer_stack residual_tower(std::uint64_t blocks, const residual_scaling& scaling) {
  layer_stack s(64);
  for (std::uint64_t i = 0; i < blocks; ++i) s.add_residual(he_branch(64), scaling);
  return s;
}

}  // namespace

TEST_CASE("20 residual ReLU blocks with He branches: unscaled the stream grows by 3 a block, as predicted and measured") {
  const layer_stack s = residual_tower(20, residual_scaling::none());
  REQUIRE(s.depth() == 60);
  const auto p = predict(s);
  for (std::size_t b = 0; b < 20; ++b) {
    CAPTURE(b);
    // Var(x_{b+1}) = (1 + 2 s^2) Var(x_b) with s = 1 and Var(x_0) = 1
    CHECK(p[3 * b + 2].preactivation_variance == doctest::Approx(std::pow(3.0, static_cast<double>(b + 1))).epsilon(1e-12));
    CHECK(p[3 * b + 2].label == "block" + std::to_string(b + 1));
  }
  CHECK(p[0].label == "block1.layer1");
  std::size_t explodes = 0;  // x3 a block is drift the theory calls exploding
  for (const auto& row : p)
    for (const auto& w : row.warnings) explodes += w.find("forward") == 0 && w.find("explodes") != std::string::npos;
  CHECK(explodes >= 1);
  for (std::uint64_t seed : {1u, 2u, 3u}) check_every_row_agrees(compare_propagation(s, 16, stream::root(seed)));
}

TEST_CASE("20 residual ReLU blocks scaled by 1/sqrt(blocks) or by Fixup's rule stay bounded, as predicted and measured") {
  SUBCASE("1/sqrt(blocks): (1 + 2/20)^20 = 6.73, below e^2") {
    const layer_stack s = residual_tower(20, residual_scaling::inverse_sqrt(20));
    const auto p = predict(s);
    CHECK(p.back().preactivation_variance == doctest::Approx(std::pow(1.1, 20.0)).epsilon(1e-12));
    for (std::size_t b = 0; b < 20; ++b) CHECK(p[3 * b + 2].preactivation_variance <= std::exp(2.0));  // the stream
    // the branches' gradients are s^2 = 1/20 of the stream's by design: no drift warning
    for (const auto& row : p) CHECK(row.warnings.empty());
    for (std::uint64_t seed : {4u, 5u, 6u}) check_every_row_agrees(compare_propagation(s, 16, stream::root(seed)));
  }
  SUBCASE("Fixup with its last branch layer zero: the stream stays at its input variance") {
    const layer_stack s = residual_tower(20, residual_scaling::fixup(20));
    CHECK(s[1].weight_variance == 0.0);
    CHECK(s[0].weight_variance == doctest::Approx(2.0 / 64 / 20).epsilon(1e-12));  // (20^(-1/2))^2 He
    const auto p = predict(s);
    for (std::size_t b = 0; b < 20; ++b) CHECK(p[3 * b + 2].preactivation_variance == doctest::Approx(1.0).epsilon(1e-12));
    const propagation_report r = compare_propagation(s, 16, stream::root(7));
    check_every_row_agrees(r);
    CHECK(r.layers[1].preactivation.median == 0.0);  // the zeroed layer
  }
  SUBCASE("Fixup's scaling alone (last layer kept): (1 + 2/20)^20 as for 1/sqrt(blocks)") {
    const layer_stack s = residual_tower(20, residual_scaling::fixup(20, false));
    const auto p = predict(s);
    CHECK(p.back().preactivation_variance == doctest::Approx(std::pow(1.1, 20.0)).epsilon(1e-12));
    for (std::uint64_t seed : {8u, 9u, 10u}) check_every_row_agrees(compare_propagation(s, 16, stream::root(seed)));
  }
}

// Normalizer-free blocks (Brock, De & Smith, ICLR 2021, from memory): x + alpha
// branch(x / beta), beta the stream's expected standard deviation at the block.  With a
// variance-preserving branch -- a He ReLU layer (E[relu(h)^2] = q / 2 = E[x^2], He et al.
// 2015 eq. 10) then a LeCun linear layer (fan_in Var W = 1) -- the stream grows by exactly
// alpha^2 a block: Var(x_i) = 1 + i alpha^2, linear in depth instead of 3^i unscaled.
namespace {
layer_stack preserving_branch(std::uint64_t width) {
  layer_stack b(width);
  b.add_dense(width, activation::relu(), he_normal{}).add_dense(width, activation::identity(), lecun_normal{});
  return b;
}
}  // namespace

TEST_CASE("20 normalizer-free blocks: the stream grows by alpha^2 a block, as predicted and measured") {
  const double alpha = 0.2;
  layer_stack s(64);
  for (int i = 0; i < 20; ++i) s.add_residual(preserving_branch(64), normalization_free_scaling(s, alpha));
  const auto p = predict(s);
  for (std::size_t b = 0; b < 20; ++b) {
    CAPTURE(b);
    const double before = 1.0 + alpha * alpha * static_cast<double>(b);  // Var(x_b), the block's input
    CHECK(s[3 * b].weight_variance == doctest::Approx(2.0 / 64 / before).epsilon(1e-12));  // He / beta^2
    CHECK(s[3 * b + 2].branch_scale == alpha);
    CHECK(p[3 * b].preactivation_variance == doctest::Approx(2.0).epsilon(1e-12));  // the branch reads unit variance
    CHECK(p[3 * b + 2].preactivation_variance == doctest::Approx(before + alpha * alpha).epsilon(1e-12));
  }
  for (const auto& row : p) CHECK(row.warnings.empty());
  for (std::uint64_t seed : {11u, 12u, 13u}) check_every_row_agrees(compare_propagation(s, 16, stream::root(seed)));

  SUBCASE("a beta left at 1 (the input not divided) is caught: measured grows as (1 + alpha^2)^i") {
    const double a = 0.5;  // 1.25^20 = 87 against the 1 + 20/4 = 6 predicted
    layer_stack right(64), wrong(64);
    for (int i = 0; i < 20; ++i) {
      right.add_residual(preserving_branch(64), normalization_free_scaling(right, a));
      wrong.add_residual(preserving_branch(64), residual_scaling::normalization_free(a, 1.0));
    }
    CHECK(predict(wrong).back().preactivation_variance == doctest::Approx(std::pow(1.25, 20.0)).epsilon(1e-12));
    const propagation_report r = compare_propagation(wrong, predict(right), 16, stream::root(14));
    CHECK_FALSE(r.layers.back().preactivation.agrees);
  }
  SUBCASE("on feature maps with convolution branches: predicted and measured agree") {
    layer_stack m = layer_stack::feature_maps(16, {8});
    const convolution_geometry same{{}, same_padding({3}), {}};
    for (int i = 0; i < 4; ++i) {
      layer_stack b = layer_stack::feature_maps(16, {8});
      b.add_convolution(convolution(16, 16, {3}), same, activation::relu(), he_normal{})
          .add_convolution(convolution(16, 16, {3}), same, activation::identity(), lecun_normal{});
      m.add_residual(b, normalization_free_scaling(m, alpha));
    }
    check_every_row_agrees(compare_propagation(m, 16, stream::root(15)));
  }
}

// Drift warnings compare the stream with the stream and a branch with itself: a deep
// branch of Glorot ReLU layers halves E[a^2] a layer (He et al. 2015, eq. 10 with
// n Var W = 1), 2^6 = 64 over six layers, and is warned about inside the branch.
TEST_CASE("drift inside a residual branch is still warned about") {
  layer_stack s(64);
  layer_stack deep(64);
  for (int i = 0; i < 6; ++i) deep.add_dense(64, activation::relu(), glorot_normal{});
  s.add_residual(deep, residual_scaling::none(), "deep");
  const auto p = predict(s);
  std::size_t inside = 0;
  for (std::size_t l = 0; l < 6; ++l)
    for (const auto& w : p[l].warnings) inside += w.find("forward") == 0 && w.find("vanishes") != std::string::npos;
  CHECK(inside >= 1);
}

TEST_CASE("the unscaled prediction is caught when the branch scale is wrong") {
  // measured with 1/sqrt(20) branches, predicted as unscaled: the rows disagree from block 1 on
  const layer_stack scaled = residual_tower(4, residual_scaling::inverse_sqrt(20));
  const layer_stack unscaled = residual_tower(4, residual_scaling::none());
  const propagation_report r = compare_propagation(scaled, predict(unscaled), 16, stream::root(2));
  CHECK_FALSE(r.layers[2].preactivation.agrees);
  CHECK_FALSE(r.layers[11].preactivation.agrees);
}

TEST_CASE("residual blocks on feature maps and with projection skips: predicted and measured agree") {
  SUBCASE("2-D convolution branches, same padding, identity skips") {
    layer_stack s = layer_stack::feature_maps(16, {6, 6});
    const convolution_geometry same{{}, same_padding({3, 3}), {}};
    for (int i = 0; i < 4; ++i) {
      layer_stack b = layer_stack::feature_maps(16, {6, 6});
      b.add_convolution(convolution(16, 16, {3, 3}), same, activation::relu(), he_normal{})
          .add_convolution(convolution(16, 16, {3, 3}), same, activation::identity(), he_normal{});
      s.add_residual(b, residual_scaling::inverse_sqrt(4));
    }
    for (std::uint64_t seed : {1u, 2u}) check_every_row_agrees(compare_propagation(s, 16, stream::root(seed)));
  }
  SUBCASE("projection skips between widths, tanh branches") {
    layer_stack s(32);
    layer_stack b1(32);
    b1.add_dense(48, activation::tanh(), glorot_normal{5.0 / 3.0}).add_dense(48, activation::identity(), lecun_normal{});
    layer_stack b2(48);
    b2.add_dense(48, activation::tanh(), glorot_normal{5.0 / 3.0}).add_dense(24, activation::identity(), lecun_normal{});
    s.add_projected_residual(b1, lecun_normal{}).add_projected_residual(b2, lecun_normal{});
    s.add_dense(4, activation::identity(), glorot_normal{});
    for (std::uint64_t seed : {3u, 4u}) check_every_row_agrees(compare_propagation(s, 16, stream::root(seed)));
  }
}

TEST_CASE("residual blocks refuse a branch that does not fit its skip, with the argument named") {
  layer_stack s(8);
  layer_stack wide(8);
  wide.add_dense(16, activation::relu(), he_normal{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { s.add_residual(wide); }),
                 "argument 'branch' = a branch ending in 16 channels over extent [], expected 8 over [] to match its identity "
                 "skip"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { s.add_residual(he_branch(4)); }),
                 "argument 'branch' = a branch reading 4 channels over extent [], expected the top of the stack, 8 over []"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { s.add_residual(layer_stack(8)); }),
                 "kindling::layer_stack::add_residual: argument 'branch' = a branch of no layers, expected at least one layer"));
  layer_stack one(8);
  one.add_dense(8, activation::relu(), he_normal{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { s.add_residual(one, residual_scaling::fixup(4)); }),
                 "argument 'branch' = a branch of 1 layer, expected at least 2 layers for Fixup's rule"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { s.add_residual(he_branch(8), residual_scaling::inverse_sqrt(0)); }),
                 "argument 'scaling.blocks' = 0"));
  CHECK(mentions(message_of<std::invalid_argument>(
                     [&] { s.add_residual(he_branch(8), residual_scaling::normalization_free(0.2, 0.0)); }),
                 "argument 'scaling.beta' = 0, expected a finite number > 0"));
  CHECK(mentions(message_of<std::invalid_argument>(
                     [&] { s.add_residual(he_branch(8), residual_scaling::normalization_free(-1.0, 1.0)); }),
                 "argument 'scaling.alpha' = -1, expected a finite number >= 0"));
  layer_stack maps = layer_stack::feature_maps(4, {5});
  layer_stack conv_branch = layer_stack::feature_maps(4, {5});
  conv_branch.add_convolution(convolution(4, 4, {1}), activation::relu(), he_normal{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { maps.add_projected_residual(conv_branch, lecun_normal{}); }),
                 "expected a projection skip between features"));
  CHECK(s.depth() == 0);  // nothing was appended by a refused call
}
