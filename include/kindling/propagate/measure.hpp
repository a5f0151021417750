// kindling/propagate/measure.hpp (Eigen): measured propagation.  The stack (dense layers,
// convolutions placed on feature maps, residual sums) is
// initialized for real, several times (independent draws), a random batch goes forward
// and a random output gradient goes back through each draw, and per layer the second
// moments of the pre-activations h_l and of the gradients dL/dh_l are set beside the
// mean-field prediction (mean_field.hpp) -- each layer against its own prediction,
// forward and backward.
//
// Draws.  Draw k (k = 0 .. trials-1) uses the stream t = s.indexed(k): weights and biases
// as realize(stack, t) draws them (`label.weight`, `label.bias`), inputs N(0, E[x^2])
// from t.named("input") and output gradients N(0, E[g^2]) from t.named("output_gradient"),
// each a [units, batch] matrix (units: features, or channels x positions of a map, one
// column a sample, channel-major).  In draw k the measured moment of a layer is
//     m_k = mean over units and samples of h^2 (forward) or of (dL/dh)^2 (backward).
//
// Why several draws.  The mean-field value is an average over weight draws; one network
// differs from it by a spread that grows with depth and shrinks with width, accumulated
// the way each pass runs: forward from the input up, backward from the output down
// (He/ReLU 20 x 512, batch 64: one draw's ln m_k has a standard deviation of 0.01 at
// layer 1 and 0.36 at layer 20 forward, 0.04 at layer 20 and 0.17 at layer 1 backward;
// for ReLU networks the log-variance of squared gradients grows linearly in
// sum_l 1/n_l, Hanin, NeurIPS 2018; Hanin & Nica 2019).  No formula for one draw's
// spread is trusted here: it is measured, as the spread across independent draws.
//
// The rule.  With x_k = ln(m_k / predicted), their mean xbar and standard deviation s
// over the K draws, a layer's moment agrees when
//     |xbar + s^2/2|  <=  t_{K-1}(1 - a/2) s / sqrt(K)  +  c w_l,
//   - xbar + s^2/2 estimates ln(mean of m / predicted): for a log-normal m the mean of
//     the logs sits s^2/2 below the log of the mean, and the prediction is a mean;
//   - t_{K-1} is Student's t quantile (the spread is estimated from the same K draws),
//     a = false_alarm / (2 L): Bonferroni over the 2 L comparisons of an L-layer table;
//   - c w_l is a finite-width allowance.  The mean-field value is the limit of wide
//     layers; at finite width the ensemble mean differs from it by O(1/n) a layer.  For
//     ReLU the means are exact at any width (forward because E[relu(h)^2] = q/2 given
//     the layer below; backward as for the squared Jacobian entries, Hanin 2018), for
//     tanh and SELU they are not: measured here, 0.1-0.4 x sum 1/n (tanh with and
//     without the gain, at the edge of chaos, SELU; widths 64 and 512, 200-2000 draws).
//     w_l = sum 1/n_k over the layers the pass has been through before reaching layer
//     l -- forward k < l (from the input up), backward the whole forward pass below the
//     top layer and then k > l (from the output down) -- and c = finite_width_allowance
//     (1 by default, 0 to test the means as exact).
//
// False-alarm rate.  If the x_k are normal and the prediction is the ensemble mean, each
// comparison raises a false alarm with probability at most a, and a correct table of L
// layers shows a NO with probability at most false_alarm (default 0.001); the allowance
// only lowers it.  Measured (tests/propagate/measure.cpp, "false-alarm rate of the
// agreement rule"), 16 draws of 16 samples of ReLU 6 x 64 with no allowance, 300 tables:
// nominal 0.2 a table (0.0167 a comparison) -> observed 0.127 (0.0164); nominal 0.05
// (0.0042) -> observed 0.037 (0.0036).  With the defaults: 0 NO rows in 2500 comparisons
// of 200 correct tables (ReLU, tanh with biases, SELU, a 5-unit head), and every layer
// agrees for 10 seeds of He/ReLU 20 x 512 and of Glorot/tanh 20 x 256.
// Power: the smallest error a row can catch is its band (`tolerance`, shown when a row
// disagrees); it shrinks as 1/sqrt(trials).  Layer 1 of He/ReLU 20 x 512 catches about
// 2%; a prediction with sigma_w off by 1.5 fails at every layer; a 5-unit head behind
// 32-unit ReLU layers varies by x/2.3 from one draw to the next, so its band is wider
// than x/2.5 at 16 draws and a 2.5x error there takes 64.
//
// Cost and reproducibility.  Each draw is one task of the executor: it draws its network
// and streams the batch through it in slices of 32 columns (pass_task_columns), keeping
// only one slice of activations at a time, and sums in a fixed order.  Memory is one
// drawn network and one slice per running task, whatever the batch (no batch x batch
// matrix, nothing that grows with the batch); the results are the same bits on any
// executor, serial or threaded.  (Eigen built with OpenMP also splits each product over
// its own threads; with a parallel executor, or on a small machine, Eigen::setNbThreads(1)
// avoids running both.)
#ifndef KINDLING_PROPAGATE_MEASURE_HPP
#define KINDLING_PROPAGATE_MEASURE_HPP

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <functional>
#include <stdexcept>
#include <string>
#include <vector>

#include "../eigen.hpp"
#include "../schemes/orthogonal.hpp"
#include "convolution_pass.hpp"
#include "mean_field.hpp"

namespace kindling {

/// Orthogonal weights (gain g, a [fan_out, fan_in] unit matrix with orthonormal rows or
/// columns): every entry has variance g^2 / max(fan_in, fan_out).
inline double weight_variance_of(const orthogonal& s, const fans& f) {
  return s.gain * s.gain / static_cast<double>(std::max(f.fan_in, f.fan_out));
}

/// The parameters of a stack, drawn.
struct realized_stack {
  std::vector<Eigen::MatrixXd> weights;  // [width, in_width]; convolutions [out, in / groups x taps]
  std::vector<Eigen::VectorXd> biases;   // [width] (one a channel for convolutions)
};

namespace detail {
/// Dense layers only (the pass diagnostics read weight rows as units).
inline void require_dense_stack(const layer_stack& stack, const char* where) {
  stack.require_layers(where);
  for (const stack_layer& l : stack.layers()) {
    if (!l.dense || !l.draw) {
      reject_argument<std::invalid_argument>(where, "stack", "a stack whose layer '" + l.label +
                                                                 "' is a convolution or a residual sum",
                                             "dense layers only");
    }
  }
}
/// Layers the measured pass can run: dense ones and convolutions placed on a map.
inline void require_runnable_stack(const layer_stack& stack, const char* where) {
  stack.require_layers(where);
  for (const stack_layer& l : stack.layers()) {
    if (!l.draw) {
      reject_argument<std::invalid_argument>(
          where, "stack", "a stack whose layer '" + l.label + "' is a convolution without a spatial extent",
          "dense layers or convolutions placed on a feature map (build the stack with "
          "layer_stack::feature_maps; a convolution without an extent is analysed through "
          "its fans by predict())");
    }
  }
}
inline Eigen::Index eigen_index(std::uint64_t n) { return static_cast<Eigen::Index>(n); }
/// Columns of a layer's weight matrix: in_width (dense) or in / groups x taps.
inline Eigen::Index weight_columns(const stack_layer& l) {
  if (l.residual && !l.projected) return 0;  // an identity skip has no weight
  return l.map ? eigen_index(l.map->in_channels() / l.map->groups() * l.map->taps()) : eigen_index(l.in_width);
}
/// h = W a + b (dense) or the convolution of a (convolution_pass.hpp).
inline void layer_forward(const stack_layer& l, const Eigen::MatrixXd& w, const Eigen::VectorXd& b,
                          const Eigen::MatrixXd& a, Eigen::MatrixXd& h) {
  if (l.map) {
    convolution_forward(*l.map, w, b, a, h);
    return;
  }
  h.noalias() = w * a;
  h.colwise() += b;
}
/// The gradient with respect to the layer's input from delta, that with respect to h.
inline void layer_backward(const stack_layer& l, const Eigen::MatrixXd& w, const Eigen::MatrixXd& delta,
                           Eigen::MatrixXd& d) {
  if (l.map) {
    convolution_backward(*l.map, w, delta, d);
    return;
  }
  d.noalias() = w.transpose() * delta;
}

/// One slice of samples through the stack: forward from `a` (the input), then back from
/// `d` (the loss gradient at the output); pre(l, h_l) and grad(l, dL/dh_l) see every
/// layer.  A residual sum adds its skip to s times the branch's output and sends the
/// gradient back both ways (the skip's share waits for the block's input layer).
template <class Pre, class Grad>
void run_slice(const layer_stack& stack, const realized_stack& net, Eigen::MatrixXd a, Eigen::MatrixXd d, Pre&& pre,
               Grad&& grad) {
  const auto& layers = stack.layers();
  const std::size_t n = layers.size();
  std::vector<Eigen::MatrixXd> h(n), kept(n + 1), skipped(n + 1);  // kept/skipped: 0 the input, l + 1 layer l
  std::vector<bool> keep(n + 1, false);
  for (const stack_layer& l : layers) if (l.residual) keep[l.skip_from] = true;
  if (keep[0]) kept[0] = a;
  for (std::size_t l = 0; l < n; ++l) {
    const stack_layer& L = layers[l];
    if (L.residual) {
      h[l] = L.branch_scale * a;
      if (L.projected) h[l].noalias() += net.weights[l] * kept[L.skip_from];
      else h[l] += kept[L.skip_from];
    } else {
      layer_forward(L, net.weights[l], net.biases[l], a, h[l]);
    }
    pre(l, h[l]);
    const nonlinearity& phi = L.act;
    a = h[l].unaryExpr([&phi](double x) { return phi(x); });
    if (keep[l + 1]) kept[l + 1] = a;
  }
  for (std::size_t k = n; k-- > 0;) {
    const stack_layer& L = layers[k];
    if (skipped[k + 1].size() > 0) d += skipped[k + 1];
    const nonlinearity& phi = L.act;
    const Eigen::MatrixXd delta = h[k].unaryExpr([&phi](double x) { return phi.slope(x); }).cwiseProduct(d);
    grad(k, delta);
    if (L.residual) {
      Eigen::MatrixXd& skip = skipped[L.skip_from];
      if (skip.size() == 0) skip.setZero(L.projected ? net.weights[k].cols() : delta.rows(), delta.cols());
      if (L.projected) skip.noalias() += net.weights[k].transpose() * delta;
      else skip += delta;
      d = L.branch_scale * delta;
    } else if (k > 0) {
      layer_backward(L, net.weights[k], delta, d);
    }
  }
}
}  // namespace detail

/// Draws every weight and bias of a stack from stream s (convolutions as their
/// [out, in / groups, kernel...] tensor, then read row-major as [out, in / groups x taps]).
inline realized_stack realize(const layer_stack& stack, const stream& s) {
  detail::require_runnable_stack(stack, "kindling::realize");
  realized_stack r;
  for (const stack_layer& l : stack.layers()) {
    Eigen::MatrixXd w(detail::eigen_index(l.width), detail::weight_columns(l));
    if (l.map) {
      Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> rows(w.rows(), w.cols());
      std::vector<std::uint64_t> dims{l.map->out_channels(), l.map->in_channels() / l.map->groups()};
      dims.insert(dims.end(), l.map->kernel().begin(), l.map->kernel().end());
      l.draw(strided_view<double>(rows.data(), shape(dims.begin(), dims.end())), s.named(l.label + ".weight"));
      w = rows;
    } else if (w.cols() > 0) {
      l.draw(view_of(w), s.named(l.label + ".weight"));
    }
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
/// Keeps every layer's [width, batch] matrices (for diagnose.hpp); compare_propagation
/// streams instead.
template <class Exec = serial_executor>
pass_record run_pass(const layer_stack& stack, const realized_stack& net, const Eigen::MatrixXd& input,
                     const Eigen::MatrixXd& output_gradient, Exec&& exec = Exec{}) {
  constexpr const char* where = "kindling::run_pass";
  detail::require_runnable_stack(stack, where);
  const auto& layers = stack.layers();
  if (net.weights.size() != layers.size() || net.biases.size() != layers.size()) {
    detail::reject_argument<std::invalid_argument>(
        where, "net", std::to_string(net.weights.size()) + " weights and " + std::to_string(net.biases.size()) + " biases",
        std::to_string(layers.size()) + " of each (one per layer of the stack)");
  }
  for (std::size_t l = 0; l < layers.size(); ++l) {
    if (net.weights[l].rows() != detail::eigen_index(layers[l].width) ||
        net.weights[l].cols() != detail::weight_columns(layers[l]) ||
        net.biases[l].size() != detail::eigen_index(layers[l].width)) {
      detail::reject_argument<std::invalid_argument>(
          where, "net.weights[" + std::to_string(l) + "]",
          std::to_string(net.weights[l].rows()) + " x " + std::to_string(net.weights[l].cols()) + " (bias " +
              std::to_string(net.biases[l].size()) + ")",
          std::to_string(layers[l].width) + " x " + std::to_string(detail::weight_columns(layers[l])) + " (bias " +
              std::to_string(layers[l].width) + ")");
    }
  }
  if (input.rows() != detail::eigen_index(stack.input_units()) || input.cols() == 0) {
    detail::reject_argument<std::invalid_argument>(where, "input",
                                                   std::to_string(input.rows()) + " x " + std::to_string(input.cols()),
                                                   std::to_string(stack.input_units()) + " rows and at least one column");
  }
  if (output_gradient.rows() != detail::eigen_index(stack.layers().back().units()) ||
      output_gradient.cols() != input.cols()) {
    detail::reject_argument<std::invalid_argument>(
        where, "output_gradient", std::to_string(output_gradient.rows()) + " x " + std::to_string(output_gradient.cols()),
        std::to_string(stack.layers().back().units()) + " x " + std::to_string(input.cols()));
  }
  const Eigen::Index batch = input.cols();
  pass_record rec;
  for (const stack_layer& l : layers) {
    rec.pre.emplace_back(detail::eigen_index(l.units()), batch);
    rec.grad.emplace_back(detail::eigen_index(l.units()), batch);
  }
  const Eigen::Index tasks = (batch + pass_task_columns - 1) / pass_task_columns;
  const auto task = [&](std::size_t t) {
    const Eigen::Index c0 = static_cast<Eigen::Index>(t) * pass_task_columns;
    const Eigen::Index nc = std::min(pass_task_columns, batch - c0);
    detail::run_slice(
        stack, net, input.middleCols(c0, nc), output_gradient.middleCols(c0, nc),
        [&](std::size_t l, const Eigen::MatrixXd& h) { rec.pre[l].middleCols(c0, nc) = h; },
        [&](std::size_t l, const Eigen::MatrixXd& delta) { rec.grad[l].middleCols(c0, nc) = delta; });
  };
  exec(static_cast<std::size_t>(tasks), std::function<void(std::size_t)>(task));
  return rec;
}

/// One layer's measured second moment across the draws, against its prediction.
struct measured_moment {
  double predicted = 0;
  std::vector<double> draws;  // per draw: mean over units and samples of x^2
  double median = 0;          // of the draws
  double spread = 0;          // s: standard deviation over draws of ln(draw); one draw is within x/ e^s of the median about 2 times in 3
  double deviation = 0;       // ln(mean over draws / predicted), estimated as mean ln(draw / predicted) + s^2/2
  double tolerance = 0;       // the band on |deviation|: t s / sqrt(K) + allowance
  double allowance = 0;       // its finite-width part, c w_l
  bool agrees = false;        // |deviation| <= tolerance
};

/// Predicted and measured side by side for one layer.
struct layer_comparison {
  layer_prediction predicted;
  measured_moment preactivation;  // forward: E[h_l^2]
  measured_moment gradient;       // backward: E[(dL/dh_l)^2]
  bool agrees = false;            // both
};

namespace detail {
inline std::string moment_verdict(const char* pass, const measured_moment& m) {
  return std::string(pass) + " mean/predicted = " + ratio_text(std::exp(m.deviation)) + " (median " +
         ratio_text(m.median) + " against " + ratio_text(m.predicted) + "), outside the band x/" +
         ratio_text(std::exp(m.tolerance)) + " (one draw varies by x/" + ratio_text(std::exp(m.spread)) + ")";
}
// The columns of every propagation table, the library's (propagation_report::table,
// attention_report::table) and `kindling plan`'s: what the layer is (fans, activation,
// scheme, weight_sd), what the mean field predicts (fwd_var, bwd_var) and, measured,
// the median over the draws with how much one draw varies (x/) and the verdict.  "-"
// where a column does not apply.
struct table_cells {
  std::string label, fan_in = "-", fan_out = "-", activation = "-", scheme = "-", weight_sd = "-";
  std::string fwd_var = "-", bwd_var = "-";
  std::string fwd_med = "-", fwd_spread = "-", bwd_med = "-", bwd_spread = "-", agrees = "-";
};

inline std::string table_number(double x, int digits = 4) {
  char text[48];
  std::snprintf(text, sizeof text, "%.*g", digits, x);
  return text;
}

// The layer column is as wide as the longest label, from 9 to 32 characters.
inline int table_label_width(std::size_t longest) {
  return static_cast<int>(std::min<std::size_t>(std::max<std::size_t>(longest, 9), 32));
}

inline std::string table_header(int label_width, bool measured) {
  char line[256];
  std::snprintf(line, sizeof line, "%-3s %-*s %6s %7s %-10s %-14s %9s %11s %11s", "#", label_width, "layer", "fan_in",
                "fan_out", "activation", "scheme", "weight_sd", "fwd_var", "bwd_var");
  std::string s = line;
  if (measured) {
    std::snprintf(line, sizeof line, " %11s %7s %11s %7s  %s", "fwd_med", "x/", "bwd_med", "x/", "agrees");
    s += line;
  }
  return s;
}

// One row, without its newline; `index` counts from 1.
inline std::string table_line(std::size_t index, const table_cells& c, int label_width, bool measured) {
  char line[640];
  std::snprintf(line, sizeof line, "%-3zu %-*s %6s %7s %-10s %-14s %9s %11s %11s", index, label_width, c.label.c_str(),
                c.fan_in.c_str(), c.fan_out.c_str(), c.activation.c_str(), c.scheme.c_str(), c.weight_sd.c_str(),
                c.fwd_var.c_str(), c.bwd_var.c_str());
  std::string s = line;
  if (measured) {
    std::snprintf(line, sizeof line, " %11s %7s %11s %7s  %s", c.fwd_med.c_str(), c.fwd_spread.c_str(),
                  c.bwd_med.c_str(), c.bwd_spread.c_str(), c.agrees.c_str());
    s += line;
  }
  return s;
}

// A predicted layer's cells (the measured ones "-").
inline table_cells prediction_cells(const layer_prediction& p) {
  table_cells c;
  c.label = p.label;
  c.fan_in = std::to_string(p.fans.fan_in);
  c.fan_out = std::to_string(p.fans.fan_out);
  c.activation = p.activation;
  c.scheme = p.scheme;
  c.weight_sd = table_number(std::sqrt(p.weight_variance));
  c.fwd_var = table_number(p.preactivation_variance);
  c.bwd_var = table_number(p.gradient_variance);
  return c;
}

// The same with the measured cells of a comparison.
inline table_cells comparison_cells(const layer_comparison& l) {
  table_cells c = prediction_cells(l.predicted);
  c.fwd_med = table_number(l.preactivation.median);
  c.fwd_spread = table_number(std::exp(l.preactivation.spread), 3);
  c.bwd_med = table_number(l.gradient.median);
  c.bwd_spread = table_number(std::exp(l.gradient.spread), 3);
  c.agrees = l.agrees ? "yes" : "NO";
  return c;
}

}  // namespace detail

struct propagation_report {
  std::vector<layer_comparison> layers;
  std::uint64_t batch = 0;     // samples a draw
  std::size_t trials = 0;      // independent draws
  double false_alarm = 0;      // bound on P(some row NO) for a correct table
  double quantile = 0;         // t_{K-1} used by every comparison
  bool all_agree() const {
    for (const auto& l : layers) if (!l.agrees) return false;
    return true;
  }
  /// "" when layer i agrees, else one sentence saying which pass disagrees and by how much.
  std::string disagreement(std::size_t i) const {
    const layer_comparison& c = layers.at(i);
    std::string s;
    if (!c.preactivation.agrees) s = detail::moment_verdict("forward", c.preactivation);
    if (!c.gradient.agrees) s += (s.empty() ? "" : "; ") + detail::moment_verdict("backward", c.gradient);
    return s;
  }
  /// How the verdict was reached, one line (printed under the table).  `scope` names
  /// what the false-alarm budget covers: the whole table, or (a table cut into parts,
  /// as `kindling plan` prints around recurrent cells and attention blocks) "these rows".
  std::string method(const char* scope = "the whole table") const {
    char line[448];
    std::snprintf(line, sizeof line,
                  "%zu draws of %llu sample%s; fwd_med/bwd_med: median over the draws, x/: how much one draw "
                  "varies; a row agrees when the mean over the draws is within t(%zu) = %.3g standard errors "
                  "plus a finite-width allowance of the prediction (false alarm <= %g for %s)",
                  trials, static_cast<unsigned long long>(batch), batch == 1 ? "" : "s", trials > 0 ? trials - 1 : 0, quantile,
                  false_alarm, scope);
    return line;
  }
  /// A plain-text table, one row a layer, with the columns of `kindling plan --measure`
  /// (detail::table_header), each row's warnings and disagreement under it.
  std::string table() const {
    std::size_t longest = 0;
    for (const layer_comparison& l : layers) longest = std::max(longest, l.predicted.label.size());
    const int width = detail::table_label_width(longest);
    std::string s = detail::table_header(width, true) + "\n";
    for (std::size_t i = 0; i < layers.size(); ++i) {
      const layer_comparison& l = layers[i];
      s += detail::table_line(i + 1, detail::comparison_cells(l), width, true) + "\n";
      for (const auto& w : l.predicted.warnings) s += "    warning: " + w + "\n";
      if (!l.agrees) s += "    disagrees: " + disagreement(i) + "\n";
    }
    s += method() + "\n";
    return s;
  }
};

struct measure_options {
  propagation_options analysis;
  std::size_t trials = 16;              // independent draws, at least 2
  double false_alarm = 1e-3;            // for the whole table, in (0, 1)
  double finite_width_allowance = 1.0;  // c, >= 0 (0: test the means as exact)
};

namespace detail {

// P(|T| > t), two-sided, for Student's t with nu degrees of freedom at t = sqrt(nu) cot(phi),
// phi in (0, pi/2]: the closed forms for integer nu (Abramowitz & Stegun 26.7.3 and 26.7.4,
// theta = atan(t / sqrt(nu)) = pi/2 - phi), written in phi so that far tails keep their
// relative precision (nu = 1: exactly 2 phi / pi).
inline double student_t_tail(double phi, std::uint64_t nu) {
  constexpr double pi = 3.14159265358979323846;
  const double c = std::sin(phi), s = std::cos(phi), c2 = c * c;  // cos theta, sin theta
  if (nu % 2 == 1) {
    double term = c, sum = nu > 1 ? c : 0.0;
    for (std::uint64_t k = 3; k + 2 <= nu; k += 2) {
      term *= c2 * static_cast<double>(k - 1) / static_cast<double>(k);
      sum += term;
    }
    return 2.0 / pi * (phi - s * sum);  // 1 - (2/pi)(theta + sin theta * sum)
  }
  double term = 1.0, sum = 1.0;
  for (std::uint64_t k = 2; k + 2 <= nu; k += 2) {
    term *= c2 * static_cast<double>(k - 1) / static_cast<double>(k);
    sum += term;
  }
  return 1.0 - s * sum;
}

/// t with P(|T| > t) = p (two-sided), Student's t with nu >= 1 degrees of freedom, by
/// bisection on phi to the last bit (the tail falls as phi falls).
inline double student_t_two_sided(double p, std::uint64_t nu) {
  double lo = 0.0, hi = 1.5707963267948966;
  for (int i = 0; i < 2200; ++i) {
    const double mid = 0.5 * (lo + hi);
    if (mid == lo || mid == hi) break;
    if (student_t_tail(mid, nu) > p) hi = mid; else lo = mid;
  }
  const double phi = 0.5 * (lo + hi);
  return std::sqrt(static_cast<double>(nu)) * std::cos(phi) / std::sin(phi);
}

inline measured_moment judge_moment(double predicted, std::vector<double> draws, double quantile,
                                    double allowance) {
  measured_moment m;
  m.predicted = predicted;
  m.allowance = allowance;
  std::vector<double> sorted = draws;
  std::sort(sorted.begin(), sorted.end());
  const std::size_t k = sorted.size();
  m.median = k % 2 == 1 ? sorted[k / 2] : 0.5 * (sorted[k / 2 - 1] + sorted[k / 2]);
  m.draws = std::move(draws);
  if (predicted == 0.0 && sorted.back() == 0.0) {  // nothing predicted and nothing measured
    m.tolerance = allowance;
    m.agrees = true;
    return m;
  }
  if (!(predicted > 0.0 && sorted.front() > 0.0 && std::isfinite(sorted.back()))) {
    m.deviation = std::numeric_limits<double>::infinity();  // a zero on one side only
    m.tolerance = allowance;
    return m;
  }
  double mean = 0.0;
  for (double v : m.draws) mean += std::log(v / predicted);
  mean /= static_cast<double>(k);
  double ss = 0.0;
  for (double v : m.draws) {
    const double d = std::log(v / predicted) - mean;
    ss += d * d;
  }
  m.spread = std::sqrt(ss / static_cast<double>(k - 1));
  m.deviation = mean + 0.5 * m.spread * m.spread;
  m.tolerance = quantile * m.spread / std::sqrt(static_cast<double>(k)) + allowance;
  m.agrees = std::fabs(m.deviation) <= m.tolerance;
  return m;
}

// One draw: the network from t, the batch streamed in slices of pass_task_columns
// columns; per layer the mean over units and samples of h^2 and of (dL/dh)^2.
struct draw_moments {
  std::vector<double> pre, grad;
};

inline draw_moments measure_draw(const layer_stack& stack, const stream& t, std::uint64_t batch,
                                 double output_gradient_variance) {
  const realized_stack net = realize(stack, t);
  const auto& layers = stack.layers();
  const std::size_t n = layers.size();
  const stream inputs = t.named("input"), gradients = t.named("output_gradient");
  const dist::normal x_dist{0.0, std::sqrt(stack.input_second_moment())};
  const dist::normal g_dist{0.0, std::sqrt(output_gradient_variance)};
  const shape x_shape(stack.input_units(), batch), g_shape(layers.back().units(), batch);
  draw_moments m{std::vector<double>(n, 0.0), std::vector<double>(n, 0.0)};
  const auto columns = static_cast<Eigen::Index>(batch);
  for (Eigen::Index c0 = 0; c0 < columns; c0 += pass_task_columns) {
    const Eigen::Index nc = std::min(pass_task_columns, columns - c0);
    const auto offset = static_cast<std::uint64_t>(c0);
    Eigen::MatrixXd a(eigen_index(stack.input_units()), nc);
    fill(view_of(a).as_part_of(x_shape, shape(std::uint64_t{0}, offset)), x_dist, inputs);
    Eigen::MatrixXd d(eigen_index(layers.back().units()), nc);
    fill(view_of(d).as_part_of(g_shape, shape(std::uint64_t{0}, offset)), g_dist, gradients);
    run_slice(
        stack, net, std::move(a), std::move(d), [&m](std::size_t l, const Eigen::MatrixXd& h) { m.pre[l] += h.squaredNorm(); },
        [&m](std::size_t l, const Eigen::MatrixXd& delta) { m.grad[l] += delta.squaredNorm(); });
  }
  for (std::size_t l = 0; l < n; ++l) {
    const double count = static_cast<double>(layers[l].units()) * static_cast<double>(batch);
    m.pre[l] /= count;
    m.grad[l] /= count;
  }
  return m;
}

inline void check_measure_options(const measure_options& o, const char* where) {
  if (o.trials < 2) {
    throw std::invalid_argument(std::string(where) + ": argument 'options.trials' = " + std::to_string(o.trials) +
                                ", expected at least 2 draws (a spread needs two)");
  }
  if (!(o.false_alarm > 0.0 && o.false_alarm < 1.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.false_alarm' = " +
                            argument_text(o.false_alarm) + ", expected a number in (0, 1)");
  }
  if (!(std::isfinite(o.finite_width_allowance) && o.finite_width_allowance >= 0.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.finite_width_allowance' = " +
                            argument_text(o.finite_width_allowance) + ", expected a finite number >= 0");
  }
}

// The options of a pass fed one input moment (compare_recurrent, compare_attention):
// those of every measured pass, the input's second moment, and the batch (`unit`: what
// one element of the batch is, in the message).
template <class Options>
void check_fed_pass_options(const Options& o, std::uint64_t batch, const char* unit, const char* where) {
  check_measure_options(measure_options{{}, o.trials, o.false_alarm, o.finite_width_allowance}, where);
  if (!(std::isfinite(o.input_second_moment) && o.input_second_moment > 0.0)) {
    throw std::domain_error(std::string(where) + ": argument 'options.input_second_moment' = " +
                            argument_text(o.input_second_moment) + ", expected a finite number > 0");
  }
  if (batch < 1) {
    throw std::invalid_argument(std::string(where) + ": argument 'batch' = " + std::to_string(batch) +
                                ", expected at least 1 " + unit + " a draw");
  }
}

}  // namespace detail

/// The measured table against a given prediction (one row per layer of `stack`, e.g.
/// predict() of another stack of the same widths): draws `stack` options.trials times
/// and compares each layer's measured moments with `predicted`.
template <class Exec = serial_executor>
propagation_report compare_propagation(const layer_stack& stack, const std::vector<layer_prediction>& predicted,
                                       std::uint64_t batch, const stream& s, const measure_options& options = {},
                                       Exec&& exec = Exec{}) {
  constexpr const char* where = "kindling::compare_propagation";
  detail::require_runnable_stack(stack, where);
  detail::check_options(options.analysis, where);
  detail::check_measure_options(options, where);
  if (batch < 1) {
    throw std::invalid_argument(std::string(where) + ": argument 'batch' = " + std::to_string(batch) +
                                ", expected at least 1 sample a draw");
  }
  const auto& layers = stack.layers();
  const std::size_t n = layers.size();
  if (predicted.size() != n) {
    detail::reject_argument<std::invalid_argument>(where, "predicted", std::to_string(predicted.size()) + " rows",
                                                   std::to_string(n) + " (one per layer of the stack)");
  }
  for (std::size_t l = 0; l < n; ++l) {
    if (predicted[l].width != layers[l].width) {
      detail::reject_argument<std::invalid_argument>(where, "predicted[" + std::to_string(l) + "].width",
                                                     std::to_string(predicted[l].width),
                                                     std::to_string(layers[l].width) + " (the stack's layer '" +
                                                         layers[l].label + "')");
    }
  }
  std::vector<detail::draw_moments> draws(options.trials);
  const double g2 = options.analysis.output_gradient_variance;
  const auto task = [&](std::size_t k) { draws[k] = detail::measure_draw(stack, s.indexed(k), batch, g2); };
  exec(options.trials, std::function<void(std::size_t)>(task));

  propagation_report report;
  report.batch = batch;
  report.trials = options.trials;
  report.false_alarm = options.false_alarm;
  report.quantile = detail::student_t_two_sided(options.false_alarm / (2.0 * static_cast<double>(n)),
                                                options.trials - 1);
  // Finite-width paths: forward sum_{k<l} 1/n_k; backward the whole forward pass below
  // the top layer, then sum_{k>l} 1/n_k from the output down.
  // An identity residual sum draws nothing and adds no term.
  const auto term = [&layers](std::size_t k) {
    return layers[k].residual && !layers[k].projected ? 0.0 : 1.0 / static_cast<double>(layers[k].width);
  };
  std::vector<double> below(n, 0.0), above(n, 0.0);
  for (std::size_t l = 1; l < n; ++l) below[l] = below[l - 1] + term(l - 1);
  for (std::size_t l = n - 1; l-- > 0;) above[l] = above[l + 1] + term(l + 1);
  const double c = options.finite_width_allowance;
  for (std::size_t l = 0; l < n; ++l) {
    std::vector<double> fwd(options.trials), bwd(options.trials);
    for (std::size_t k = 0; k < options.trials; ++k) {
      fwd[k] = draws[k].pre[l];
      bwd[k] = draws[k].grad[l];
    }
    layer_comparison row;
    row.predicted = predicted[l];
    row.preactivation = detail::judge_moment(predicted[l].preactivation_variance, std::move(fwd), report.quantile,
                                             c * below[l]);
    row.gradient = detail::judge_moment(predicted[l].gradient_variance, std::move(bwd), report.quantile,
                                        c * (below[n - 1] + above[l]));
    row.agrees = row.preactivation.agrees && row.gradient.agrees;
    report.layers.push_back(std::move(row));
  }
  return report;
}

/// One call: the mean-field table of `stack` (predict) and the same table measured over
/// options.trials independent draws of it, `batch` samples each, side by side.
template <class Exec = serial_executor>
propagation_report compare_propagation(const layer_stack& stack, std::uint64_t batch, const stream& s,
                                       const measure_options& options = {}, Exec&& exec = Exec{}) {
  detail::require_runnable_stack(stack, "kindling::compare_propagation");
  return compare_propagation(stack, predict(stack, options.analysis), batch, s, options, std::forward<Exec>(exec));
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_MEASURE_HPP
