// A surrogate model of a shell-and-tube heat exchanger: 12 sensor inputs (inlet
// temperatures, flow rates, fouling estimate...) -> 6 tanh layers -> outlet temperatures.
// Before training, check that signals and gradients keep their scale through the
// stack: the mean-field prediction and the same measured over 16 independent draws of
// the weights, side by side, in one call.
#include <cstdio>

#include <kindling/propagate/criticality.hpp>
#include <kindling/propagate/measure.hpp>
#include <kindling/schemes/fan_scaled.hpp>

int main() {
  using namespace kindling;
  const double bias_variance = 0.05;
  // Where is the edge of chaos for tanh with this bias variance?
  const critical_point edge = find_critical_point(activation::tanh(), bias_variance);
  std::printf("tanh, sigma_b^2 = %.2f: critical sigma_w^2 = %.4f, q* = %.4f, length depth %.1f\n",
              bias_variance, edge.weight_variance, edge.fixed_point, edge.length_depth);

  layer_stack surrogate(12);
  surrogate.add_dense(256, activation::tanh(), glorot_normal{5.0 / 3.0}, bias_variance, "inlet")
      .add_dense(256, activation::tanh(), glorot_normal{5.0 / 3.0}, bias_variance)
      .add_dense(256, activation::tanh(), glorot_normal{5.0 / 3.0}, bias_variance)
      .add_dense(256, activation::tanh(), glorot_normal{5.0 / 3.0}, bias_variance)
      .add_dense(256, activation::tanh(), glorot_normal{5.0 / 3.0}, bias_variance)
      .add_dense(4, activation::identity(), glorot_normal{}, 0.0, "outlets");

  const propagation_report report =
      compare_propagation(surrogate, 256, make_stream(2026, "heat_exchanger"));
  std::printf("%s", report.table().c_str());
  std::printf("%zu draws of %llu samples: %s\n", report.trials, static_cast<unsigned long long>(report.batch),
              report.all_agree() ? "prediction and measurement agree" : "see the rows marked NO");
  return report.all_agree() ? 0 : 1;
}
