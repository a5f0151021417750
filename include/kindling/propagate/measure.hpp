// kindling/propagate/measure.hpp (Eigen): measured propagation.  The dense stack is
// initialized for real (each layer's scheme, stream `label.weight`; biases N(0,
// sigma_b^2) from `label.bias`), a random batch goes forward and a random output
// gradient goes back, and the per-layer second moments of the pre-activations h_l and
// of the gradients dL/dh_l are set beside the mean-field prediction (mean_field.hpp).
//
// Statistics.  Given the weights, the batch columns are i.i.d., so the per-sample
// averages m_b = mean_i h_{l,i,b}^2 are i.i.d. and give the mean, its standard error
// and a 95% interval (normal quantile 1.96) -- the "confidence interval".  The mean-field
// value is an average over weight draws too; one network differs from it by
//   relative variance v_l = 2 tr(C^2) / (tr C)^2 / n_l  per layer
// (for Gaussian W with rows w_i ~ N(0, s I): Var[(1/n) sum_i w_i' C w_i] = 2 s^2 tr(C^2)/n
// -- the variance of a Gaussian quadratic form), with C the second-moment matrix of the
// layer's input, estimated from the batch without bias (off-diagonal Gram entries).  Layers add up: forward spread_l = sqrt(sum_{k<=l} v_k);
// gradients also collect the terms of the layers above.  The deviations are
// multiplicative (layers multiply), so a layer `agrees` when
//   |ln(measured / predicted)| <= z sqrt(se_rel^2 + spread^2),   z = options.z.
// With z = 4 and Gaussian errors one comparison raises a false alarm with probability
// 6e-5 over random seeds (the tests use fixed seeds, so they are deterministic).
//
// Reproducible from the seed: the batch is cut into fixed tasks of 32 columns whatever
// the executor, so a serial and a threaded run give the same bits.
#ifndef KINDLING_PROPAGATE_MEASURE_HPP
#define KINDLING_PROPAGATE_MEASURE_HPP

#include <Eigen/Dense>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <functional>
#include <stdexcept>
#include <string>
#include <vector>

#include "../eigen.hpp"
#include "../schemes/orthogonal.hpp"
#include "mean_field.hpp"

namespace kindling {

/// Orthogonal weights (gain g, a [fan_out, fan_in] unit matrix with orthonormal rows or
/// columns): every entry has variance g^2 / max(fan_in, fan_out).
inline double weight_variance_of(const orthogonal& s, const fans& f) {
  return s.gain * s.gain / static_cast<double>(std::max(f.fan_in, f.fan_out));
}

/// The parameters of a dense stack, drawn.
struct realized_stack {
  std::vector<Eigen::MatrixXd> weights;  // [width, in_width]
  std::vector<Eigen::VectorXd> biases;
};

namespace detail {
inline void require_dense_stack(const layer_stack& stack, const char* where) {
  stack.require_layers(where);
  for (const stack_layer& l : stack.layers()) {
    if (!l.dense || !l.draw) {
      throw std::invalid_argument(std::string(where) + ": layer '" + l.label +
                                  "' of argument 'stack' is a convolution, expected dense layers "
                                  "only (convolutions are analysed through their fans by predict())");
    }
  }
}
inline Eigen::Index eigen_index(std::uint64_t n) { return static_cast<Eigen::Index>(n); }
}  // namespace detail

/// Draws every weight and bias of a dense stack from stream s.
inline realized_stack realize(const layer_stack& stack, const stream& s) {
  detail::require_dense_stack(stack, "kindling::realize");
  realized_stack r;
  for (const stack_layer& l : stack.layers()) {
    Eigen::MatrixXd w(detail::eigen_index(l.width), detail::eigen_index(l.in_width));
    l.draw(view_of(w), s.named(l.label + ".weight"));
    Eigen::VectorXd b = Eigen::VectorXd::Zero(detail::eigen_index(l.width));
    if (l.bias_variance > 0.0) fill(view_of(b), dist::normal{0.0, std::sqrt(l.bias_variance)}, s.named(l.label + ".bias"));
    r.weights.push_back(std::move(w));
    r.biases.push_back(std::move(b));
  }
  return r;
}

/// Pre-activations h_l and gradients dL/dh_l of one pass, one column a sample.
struct pass_record {
  std::vector<Eigen::MatrixXd> pre;
  std::vector<Eigen::MatrixXd> grad;
};

inline constexpr Eigen::Index pass_task_columns = 32;

/// Forward: h_l = W_l a_{l-1} + b_l; backward: delta_L = phi_L'(h_L) * g,
/// delta_l = phi_l'(h_l) * (W_{l+1}^T delta_{l+1}).  Tasks of 32 columns on `exec`.
template <class Exec = serial_executor>
pass_record run_pass(const layer_stack& stack, const realized_stack& net, const Eigen::MatrixXd& input,
                     const Eigen::MatrixXd& output_gradient, Exec&& exec = Exec{}) {
  constexpr const char* where = "kindling::run_pass";
  detail::require_dense_stack(stack, where);
  const auto& layers = stack.layers();
  if (net.weights.size() != layers.size() || net.biases.size() != layers.size()) {
    throw std::invalid_argument(std::string(where) + ": argument 'net' has " +
                                std::to_string(net.weights.size()) + " weights, expected " +
                                std::to_string(layers.size()));
  }
  for (std::size_t l = 0; l < layers.size(); ++l) {
    if (net.weights[l].rows() != detail::eigen_index(layers[l].width) ||
        net.weights[l].cols() != detail::eigen_index(layers[l].in_width) ||
        net.biases[l].size() != detail::eigen_index(layers[l].width)) {
      throw std::invalid_argument(std::string(where) + ": argument 'net' layer " + std::to_string(l) +
                                  " has a weight of " + std::to_string(net.weights[l].rows()) + " x " +
                                  std::to_string(net.weights[l].cols()) + ", expected " +
                                  std::to_string(layers[l].width) + " x " + std::to_string(layers[l].in_width));
    }
  }
  if (input.rows() != detail::eigen_index(stack.input_width()) || input.cols() == 0) {
    throw std::invalid_argument(std::string(where) + ": argument 'input' has " + std::to_string(input.rows()) +
                                " rows and " + std::to_string(input.cols()) + " columns, expected " +
                                std::to_string(stack.input_width()) + " rows and at least one column");
  }
  if (output_gradient.rows() != detail::eigen_index(stack.top_width()) ||
      output_gradient.cols() != input.cols()) {
    throw std::invalid_argument(std::string(where) + ": argument 'output_gradient' is " +
                                std::to_string(output_gradient.rows()) + " x " +
                                std::to_string(output_gradient.cols()) + ", expected " +
                                std::to_string(stack.top_width()) + " x " + std::to_string(input.cols()));
  }
  const Eigen::Index batch = input.cols();
  pass_record rec;
  for (const stack_layer& l : layers) {
    rec.pre.emplace_back(detail::eigen_index(l.width), batch);
    rec.grad.emplace_back(detail::eigen_index(l.width), batch);
  }
  const Eigen::Index tasks = (batch + pass_task_columns - 1) / pass_task_columns;
  const auto task = [&](std::size_t t) {
    const Eigen::Index c0 = static_cast<Eigen::Index>(t) * pass_task_columns;
    const Eigen::Index nc = std::min(pass_task_columns, batch - c0);
    Eigen::MatrixXd a = input.middleCols(c0, nc);
    for (std::size_t l = 0; l < layers.size(); ++l) {
      Eigen::MatrixXd h = net.weights[l] * a;
      h.colwise() += net.biases[l];
      rec.pre[l].middleCols(c0, nc) = h;
      const nonlinearity& phi = layers[l].act;
      a = h.unaryExpr([&phi](double x) { return phi(x); });
    }
    Eigen::MatrixXd d = output_gradient.middleCols(c0, nc);
    for (std::size_t k = layers.size(); k-- > 0;) {
      const nonlinearity& phi = layers[k].act;
      const Eigen::MatrixXd slope =
          rec.pre[k].middleCols(c0, nc).unaryExpr([&phi](double x) { return phi.slope(x); });
      Eigen::MatrixXd delta = slope.cwiseProduct(d);
      rec.grad[k].middleCols(c0, nc) = delta;
      if (k > 0) d = net.weights[k].transpose() * delta;
    }
  };
  exec(static_cast<std::size_t>(tasks), std::function<void(std::size_t)>(task));
  return rec;
}

/// A measured second moment.
struct measurement {
  double mean = 0;                    // mean over units and batch of x^2
  double standard_error = 0;          // of the mean, from the batch
  double ci_low = 0, ci_high = 0;     // 95% interval given the weights
  double weight_spread = 0;           // relative sd expected between weight draws
  std::uint64_t samples = 0;          // units x batch
  std::uint64_t independent_samples = 0;  // batch
};

/// Predicted and measured side by side for one layer.
struct layer_comparison {
  layer_prediction predicted;
  measurement preactivation;
  measurement gradient;
  double preactivation_tolerance = 0;  // on |ln(measured / predicted)|
  double gradient_tolerance = 0;
  bool agrees = false;
};

struct propagation_report {
  std::vector<layer_comparison> layers;
  std::uint64_t batch = 0;
  double z = 0;
  bool all_agree() const {
    for (const auto& l : layers) if (!l.agrees) return false;
    return true;
  }
  /// A plain-text table, one row a layer.
  std::string table() const {
    std::string s;
    char line[512];
    std::snprintf(line, sizeof line, "%-10s %6s | %11s %11s %8s | %11s %11s %8s | %s\n", "layer", "width",
                  "q pred", "q meas", "+-95%", "grad pred", "grad meas", "+-95%", "agree");
    s += line;
    for (const auto& l : layers) {
      std::snprintf(line, sizeof line, "%-10s %6llu | %11.4e %11.4e %8.2e | %11.4e %11.4e %8.2e | %s\n",
                    l.predicted.label.c_str(), static_cast<unsigned long long>(l.predicted.width),
                    l.predicted.preactivation_variance, l.preactivation.mean,
                    l.preactivation.ci_high - l.preactivation.mean, l.predicted.gradient_variance,
                    l.gradient.mean, l.gradient.ci_high - l.gradient.mean, l.agrees ? "yes" : "NO");
      s += line;
      for (const auto& w : l.predicted.warnings) s += "    warning: " + w + "\n";
    }
    return s;
  }
};

struct measure_options {
  propagation_options analysis;
  double z = 4.0;  // agreement band in combined standard deviations
};

namespace detail {
// 2 tr(C^2) / (tr C)^2 / n, the relative variance of a quadratic form over Gaussian
// weight rows (see the header comment), from the batch's Gram matrix G = A^T A:
// tr C^2 by the off-diagonal entries (E[G_bb'^2] = B^2 tr C^2 for independent columns
// b != b', unbiased), tr C by the diagonal.
inline double quadratic_form_spread(const Eigen::MatrixXd& a, std::uint64_t n) {
  const Eigen::MatrixXd g = a.transpose() * a;
  const double b = static_cast<double>(g.rows());
  const double tr = g.trace() / b;
  if (!(tr > 0.0) || g.rows() < 2) return 0.0;
  const double off = (g.squaredNorm() - g.diagonal().squaredNorm()) / (b * (b - 1.0));
  return 2.0 * off / (tr * tr) / static_cast<double>(n);
}

inline measurement measure_moment(const Eigen::MatrixXd& x, double spread2) {
  measurement m;
  const Eigen::RowVectorXd per_sample = x.array().square().colwise().mean();
  const double b = static_cast<double>(x.cols());
  m.mean = per_sample.mean();
  const double var = x.cols() > 1 ? (per_sample.array() - m.mean).square().sum() / (b - 1.0) : 0.0;
  m.standard_error = std::sqrt(var / b);
  m.ci_low = m.mean - 1.96 * m.standard_error;
  m.ci_high = m.mean + 1.96 * m.standard_error;
  m.weight_spread = std::sqrt(spread2);
  m.samples = static_cast<std::uint64_t>(x.size());
  m.independent_samples = static_cast<std::uint64_t>(x.cols());
  return m;
}

inline double relative_band(const measurement& m, double z) {
  const double se = m.mean > 0.0 ? m.standard_error / m.mean : 0.0;
  return z * std::sqrt(se * se + m.weight_spread * m.weight_spread);
}
}  // namespace detail

/// One call: the mean-field table and the same table measured on a batch of `batch`
/// samples through the stack as initialized from stream s, side by side.
template <class Exec = serial_executor>
propagation_report compare_propagation(const layer_stack& stack, std::uint64_t batch, const stream& s,
                                       const measure_options& options = {}, Exec&& exec = Exec{}) {
  constexpr const char* where = "kindling::compare_propagation";
  detail::require_dense_stack(stack, where);
  if (batch < 2) {
    throw std::invalid_argument(std::string(where) + ": argument 'batch' = " + std::to_string(batch) +
                                ", expected at least 2 samples (a standard error needs two)");
  }
  if (!(std::isfinite(options.z) && options.z > 0.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.z' = " + detail::argument_text(options.z) +
                            ", expected a finite number > 0");
  }
  const std::vector<layer_prediction> predicted = predict(stack, options.analysis);
  const realized_stack net = realize(stack, s);
  Eigen::MatrixXd x(detail::eigen_index(stack.input_width()), detail::eigen_index(batch));
  fill(view_of(x), dist::normal{0.0, std::sqrt(stack.input_second_moment())}, s.named("input"));
  Eigen::MatrixXd g(detail::eigen_index(stack.top_width()), detail::eigen_index(batch));
  fill(view_of(g), dist::normal{0.0, std::sqrt(options.analysis.output_gradient_variance)},
       s.named("output_gradient"));
  const pass_record rec = run_pass(stack, net, x, g, std::forward<Exec>(exec));

  const auto& layers = stack.layers();
  const std::size_t n = layers.size();
  std::vector<double> fwd(n), bwd(n, 0.0);
  for (std::size_t l = 0; l < n; ++l) {
    const Eigen::MatrixXd a =
        l == 0 ? x : Eigen::MatrixXd(rec.pre[l - 1].unaryExpr([&](double v) { return layers[l - 1].act(v); }));
    fwd[l] = detail::quadratic_form_spread(a, layers[l].width);
    if (l > 0) bwd[l - 1] = detail::quadratic_form_spread(rec.grad[l], layers[l - 1].width);
  }
  propagation_report report;
  report.batch = batch;
  report.z = options.z;
  double fsum = 0;
  for (std::size_t l = 0; l < n; ++l) {
    fsum += fwd[l];
    double above = 0;
    for (std::size_t k = l; k < n; ++k) above += bwd[k];
    layer_comparison c;
    c.predicted = predicted[l];
    c.preactivation = detail::measure_moment(rec.pre[l], fsum);
    c.gradient = detail::measure_moment(rec.grad[l], fsum + above);
    c.preactivation_tolerance = detail::relative_band(c.preactivation, options.z);
    c.gradient_tolerance = detail::relative_band(c.gradient, options.z);
    const double qp = c.predicted.preactivation_variance, gp = c.predicted.gradient_variance;
    c.agrees = std::fabs(std::log(c.preactivation.mean / qp)) <= c.preactivation_tolerance &&
               std::fabs(std::log(c.gradient.mean / gp)) <= c.gradient_tolerance;
    report.layers.push_back(std::move(c));
  }
  return report;
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_MEASURE_HPP
