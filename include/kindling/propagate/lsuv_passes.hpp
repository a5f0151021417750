// kindling/propagate/lsuv_passes.hpp (Eigen): LSUV (lsuv.hpp; Mishkin & Matas, ICLR
// 2016) with the library's own forward passes, so a layer stack (dense layers,
// convolutions on feature maps, residual branches) or a recurrent cell is calibrated
// without writing a callback.  The rescaling loop, its tolerance, its cap, its report
// and its failure contract (every weight restored if a pass fails) are lsuv.hpp's: these
// functions only build one lsuv_layer a weight, whose callable runs the built-in pass.
//
// What is measured.  As in the paper (from memory), the output of the weight layer
// before its nonlinearity:
//   - a stack: the population variance of the pre-activations h_l of each dense layer
//     or convolution (all units, positions and samples), from the input up; residual
//     sums hold no weight LSUV rescales (an identity skip has none; a projection's sum
//     is not linear in it) and are passed over;
//   - a recurrent cell: the input weight W only (the orthogonal recurrent weight keeps
//     the norm of the state, Saxe et al. 2014), measured as the second moment of every
//     gate's pre-activation less its bias, over all gate blocks and all T steps (the
//     weights are zero-mean, so this is the variance up to the square of a mean that
//     averages to 0).  The state part does not scale with W, so the response is partial
//     and a rescaling may take more than one step.
#ifndef KINDLING_PROPAGATE_LSUV_PASSES_HPP
#define KINDLING_PROPAGATE_LSUV_PASSES_HPP

#include <Eigen/Dense>

#include <cstdint>
#include <string>
#include <vector>

#include "lsuv.hpp"
#include "measure.hpp"
#include "recurrent.hpp"

namespace kindling {

/// Rescales the drawn weights of `net` (realize(stack, s)) so that every dense layer and
/// convolution of `stack` has pre-activation variance within options.tolerance of 1 on
/// `batch` ([input units, samples], one column a sample, as run_pass takes it).
inline lsuv_report lsuv_rescale_stack(const layer_stack& stack, realized_stack& net, const Eigen::MatrixXd& batch,
                                      const lsuv_options& options = {}) {
  constexpr const char* where = "kindling::lsuv_rescale_stack";
  detail::require_runnable_stack(stack, where);
  const auto& layers = stack.layers();
  if (net.weights.size() != layers.size() || net.biases.size() != layers.size()) {
    detail::reject_argument<std::invalid_argument>(
        where, "net", std::to_string(net.weights.size()) + " weights and " + std::to_string(net.biases.size()) + " biases",
        std::to_string(layers.size()) + " of each (realize(stack, s))");
  }
  if (batch.rows() != detail::eigen_index(stack.input_units()) || batch.cols() == 0) {
    detail::reject_argument<std::invalid_argument>(where, "batch",
                                                   std::to_string(batch.rows()) + " x " + std::to_string(batch.cols()),
                                                   std::to_string(stack.input_units()) + " rows and at least one column");
  }
  const Eigen::MatrixXd no_gradient = Eigen::MatrixXd::Zero(detail::eigen_index(layers.back().units()), batch.cols());
  std::vector<lsuv_layer<double>> calibrated;
  for (std::size_t l = 0; l < layers.size(); ++l) {
    if (layers[l].residual || net.weights[l].size() == 0) continue;
    const weight_info info{layers[l].fans, weight_layout::out_in};
    calibrated.emplace_back(layers[l].label, view_of(net.weights[l]), info, [&stack, &net, &batch, &no_gradient, l] {
      double variance = 0.0;
      detail::run_slice(
          stack, net, batch, no_gradient,
          [&variance, l](std::size_t k, const Eigen::MatrixXd& h) {
            if (k == l) variance = detail::entry_variance(h);
          },
          [](std::size_t, const Eigen::MatrixXd&) {});
      return variance;
    });
  }
  return lsuv_rescale(calibrated, options);
}

/// Rescales the input weight of `net` (draw_recurrent(cell, s)) so that the cell's gate
/// pre-activations have second moment within options.tolerance of 1 over the T steps of
/// `input` ([T input_width, samples], row t input_width + j feature j at step t).
inline lsuv_report lsuv_rescale_cell(const recurrent_cell& cell, realized_cell& net, const Eigen::MatrixXd& input,
                                     const lsuv_options& options = {}) {
  const Eigen::MatrixXd no_gradient = Eigen::MatrixXd::Zero(static_cast<Eigen::Index>(cell.hidden()), input.cols());
  run_recurrent(cell, net, input, no_gradient);  // its argument checks, before anything is rescaled
  std::vector<lsuv_layer<double>> calibrated;
  const weight_info info{dense(cell.input_width(), cell.hidden()).layer_fans(), weight_layout::out_in};
  calibrated.emplace_back(cell.label() + ".input_weight", view_of(net.input_weight), info, [&cell, &net, &input, &no_gradient] {
    const recurrent_moments m = run_recurrent(cell, net, input, no_gradient);
    double sum = 0.0;
    std::size_t count = 0;
    for (const auto& step : m.gates)
      for (double g : step) {
        sum += g;
        ++count;
      }
    return sum / static_cast<double>(count);
  });
  return lsuv_rescale(calibrated, options);
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_LSUV_PASSES_HPP
