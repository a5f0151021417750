// Weights and biases of a small convolutional network and of an LSTM, each in a few
// lines, on Eigen matrices. The scenario: a pump-noise spectrogram classifier
// (2-D convolutions) feeding an LSTM that tracks the pump's state over time.
#include <kindling/eigen.hpp>
#include <kindling/kindling.hpp>
#include <kindling/schemes/orthogonal.hpp>

#include <Eigen/Dense>
#include <cstdio>
#include <vector>

int main() {
  using namespace kindling;
  const stream model = make_stream(42, "pump-spectrogram");

  // Convolutional part: weights [out, in, 3, 3], He normal for ReLU; biases zero.
  std::vector<float> c1(16 * 1 * 3 * 3), c2(32 * 16 * 3 * 3), b1(16), b2(32);
  initialize(strided_view<float>(c1.data(), shape(16, 1, 3, 3)), convolution(1, 16, {3, 3}), he_normal{},
             model.named("conv1.weight"));
  initialize(strided_view<float>(c2.data(), shape(32, 16, 3, 3)), convolution(16, 32, {3, 3}), he_normal{},
             model.named("conv2.weight"));
  initialize_bias(strided_view<float>(b1.data(), shape(16)), zeros{});
  initialize_bias(strided_view<float>(b2.data(), shape(32)), zeros{});

  // LSTM with 64 inputs and 48 hidden units; gate blocks (input, forget, cell, output)
  // stacked along the rows. Input weights Glorot uniform per block, recurrent weights
  // orthogonal per block, forget-gate bias 1.
  Eigen::MatrixXf w_ih(4 * 48, 64), w_hh(4 * 48, 48);
  Eigen::VectorXf bias(4 * 48);
  initialize(view_of(w_ih), packed_dense::lstm(64, 48), glorot_uniform{}, model.named("lstm.w_ih"));
  initialize(view_of(w_hh), packed_dense::lstm(48, 48), orthogonal{}, model.named("lstm.w_hh"));
  initialize_bias(bias, forget_gate_bias{});  // an Eigen vector is a bias vector

  // Each recurrent gate block is orthogonal: Q^T Q = I.
  double worst = 0;
  for (int b = 0; b < 4; ++b) {
    const Eigen::MatrixXf q = w_hh.block(b * 48, 0, 48, 48);
    worst = std::max(worst, static_cast<double>((q.transpose() * q - Eigen::MatrixXf::Identity(48, 48)).cwiseAbs().maxCoeff()));
  }
  std::printf("conv1 %zu, conv2 %zu weights; LSTM w_ih %ldx%ld, w_hh %ldx%ld\n", c1.size(), c2.size(),
              static_cast<long>(w_ih.rows()), static_cast<long>(w_ih.cols()), static_cast<long>(w_hh.rows()),
              static_cast<long>(w_hh.cols()));
  std::printf("largest |Q^T Q - I| over the recurrent gate blocks: %.2e\n", worst);
  std::printf("forget-gate bias block: %g, input-gate bias block: %g\n", static_cast<double>(bias(60)),
              static_cast<double>(bias(0)));
  return worst < 1e-5 && bias(60) == 1.0f && bias(0) == 0.0f ? 0 : 1;
}
