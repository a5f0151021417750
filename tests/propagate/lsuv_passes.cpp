// Tests of propagate/lsuv_passes.hpp: LSUV (Mishkin & Matas, ICLR 2016: rescale each
// layer until its output variance is within 0.1 of 1, from memory) with the library's
// own forward passes.  The results are checked by an independent pass: run_pass for the
// stack and run_recurrent for the cell, on a batch the calibration did not see.
#include "kindling/propagate/lsuv_passes.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"

using namespace kindling;

TEST_CASE("LSUV brings a 10-layer convolutional stack to unit pre-activation variance at every layer") {
  // LeCun's 1 / fan_in under ReLU halves the second moment at each layer (He et al.,
  // ICCV 2015): 10 layers start near 2^-9 at the top, far from 1.
  layer_stack s = layer_stack::feature_maps(4, {48});
  const convolution_geometry same{{}, same_padding({3}), {}};
  s.add_convolution(convolution(4, 16, {3}), same, activation::relu(), lecun_normal{});
  for (int l = 1; l < 10; ++l) s.add_convolution(convolution(16, 16, {3}), same, activation::relu(), lecun_normal{});
  realized_stack net = realize(s, stream::root(31));
  const auto batch_of = [&s](const stream& st) {
    Eigen::MatrixXd x(static_cast<Eigen::Index>(s.input_units()), 24);
    fill(view_of(x), dist::normal{0.0, 1.0}, st);
    return x;
  };
  const Eigen::MatrixXd calibration = batch_of(stream::root(32)), fresh = batch_of(stream::root(33));
  const Eigen::MatrixXd zero = Eigen::MatrixXd::Zero(16 * 48, 24);
  const pass_record before = run_pass(s, net, fresh, zero);
  CHECK(detail::entry_variance(before.pre[9]) < 0.05);
  const lsuv_report r = lsuv_rescale_stack(s, net, calibration);
  INFO(r.table());
  CHECK(r.converged());
  CHECK(r.layers.size() == 10);
  const pass_record after = run_pass(s, net, calibration, zero);
  for (std::size_t l = 0; l < 10; ++l) {
    CAPTURE(l);
    CHECK(std::fabs(detail::entry_variance(after.pre[l]) - 1.0) <= 0.1);  // the tolerance, on its own batch
  }
  // On a batch it did not see, the top layer is near 1 too (a 24 x 48-position batch).
  CHECK(std::fabs(detail::entry_variance(run_pass(s, net, fresh, zero).pre[9]) - 1.0) <= 0.25);
}

TEST_CASE("LSUV brings a GRU's gate pre-activations to unit second moment over 50 steps") {
  const recurrent_cell cell(cell_kind::gru, 16, 32, 50, fixed_normal{0.0, 0.125}, orthogonal{}, 1.0);
  realized_cell net = draw_recurrent(cell, stream::root(41));
  const auto input_of = [&cell](const stream& st) {
    Eigen::MatrixXd x(static_cast<Eigen::Index>(cell.steps() * cell.input_width()), 32);
    fill(view_of(x), dist::normal{0.0, 1.0}, st);
    return x;
  };
  const Eigen::MatrixXd calibration = input_of(stream::root(42)), fresh = input_of(stream::root(43));
  const Eigen::MatrixXd zero = Eigen::MatrixXd::Zero(32, 32);
  const auto mean_gate = [&](const Eigen::MatrixXd& x) {
    const recurrent_moments m = run_recurrent(cell, net, x, zero);
    double sum = 0;
    for (const auto& step : m.gates)
      for (double g : step) sum += g;
    return sum / (50.0 * 3.0);
  };
  CHECK(mean_gate(fresh) < 0.5);  // sigma_x^2 = 16 x 0.125^2 = 0.25, plus the state part
  const Eigen::MatrixXd recurrent_before = net.recurrent_weight;
  const lsuv_report r = lsuv_rescale_cell(cell, net, calibration);
  INFO(r.table());
  CHECK(r.converged());
  CHECK(std::fabs(mean_gate(calibration) - 1.0) <= 0.1);
  CHECK(std::fabs(mean_gate(fresh) - 1.0) <= 0.15);
  CHECK(net.recurrent_weight == recurrent_before);  // only the input weight is rescaled
}

TEST_CASE("LSUV with a built-in pass refuses a batch of the wrong shape before rescaling anything") {
  layer_stack s(8);
  s.add_dense(8, activation::relu(), he_normal{});
  realized_stack net = realize(s, stream::root(1));
  const Eigen::MatrixXd w = net.weights[0];
  const std::string m = kindling_test::message_of<std::invalid_argument>(
      [&] { lsuv_rescale_stack(s, net, Eigen::MatrixXd::Ones(5, 3)); });
  CHECK(kindling_test::mentions(m, "kindling::lsuv_rescale_stack: argument 'batch' = 5 x 3, expected 8 rows and at least one column"));
  CHECK(net.weights[0] == w);
}
