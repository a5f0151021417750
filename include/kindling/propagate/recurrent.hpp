// kindling/propagate/recurrent.hpp (Eigen): recurrent cells (LSTM and GRU with packed
// gates) unrolled over T steps, predicted where the literature gives a prediction and
// measured forward and backward through time.
//
// The cells.  Inputs x_t (t = 0 .. T-1) of `input_width` features, state h of `hidden`
// units, h_{-1} = 0 (and c_{-1} = 0).  Both weights are packed (fan.hpp packed_dense):
// the input weight W [G H, input_width] and the recurrent weight U [G H, hidden], gate
// block k in rows k H .. (k+1) H - 1, each block its own dense layer for the schemes
// (fans (input_width, H) and (H, H)), drawn from its sub-stream as initialize() draws a
// packed weight.  Block order (ours, documented here and in the spec keys):
//   LSTM, G = 4: [input i, forget f, candidate g, output o]   (Gers, Schmidhuber &
//     Cummins 2000, the cell with a forget gate)
//       z = W x_t + U h_{t-1} + b,  i = sigma(z_i), f = sigma(z_f), g = tanh(z_g),
//       o = sigma(z_o),  c_t = f c_{t-1} + i g,  h_t = o tanh(c_t);
//   GRU, G = 3: [reset r, update u, candidate n]   (Cho et al., EMNLP 2014, with the
//     reset applied to the state before its product, as there)
//       r = sigma(W_r x + U_r h + b_r), u = sigma(W_u x + U_u h + b_u),
//       n = tanh(W_n x + U_n (r h) + b_n),  h_t = u h_{t-1} + (1 - u) n.
// Biases are zero except the gate that keeps the old state: the LSTM forget gate and the
// GRU update gate get `forget_bias` (1 by default: Gers et al. 2000 motivate a forget
// gate that starts open; Jozefowicz, Zaremba & Sutskever, ICML 2015, found a bias of 1
// closes most of the gap between LSTM and the best cells they searched).
//
// Prediction.  A gate's pre-activation, less its bias, is a sum of many weighted inputs:
// in the mean-field limit (Chen, Pennington & Schoenholz, ICML 2018, sec. 3, for gated
// cells) its second moment at step t is
//     q_gate(t) = sigma_x^2 E[x^2] + sigma_h^2 E[v_{t-1}^2],
// sigma_x^2 = input_width Var W, sigma_h^2 = hidden Var U, v the state the block reads
// (h_{t-1}; r h_{t-1} for the GRU candidate).  With an orthogonal U (the default) the
// recurrent part is exact for every draw (|U v| = gain |v|), and x_t is fresh at every
// step, so the formula holds in expectation over the input weights given the state: it is
// checked per step and per gate against the state moment measured in the same draw.
// The state's own second moment over time (c_t, h_t) and the gradients through time have
// no closed form here that we trust (the gates at t and the state at t - 1 are
// correlated through the tied weights): they are measured only, and checked against a
// NumPy computation of the same unrolled cell (tests/propagate/check_recurrent.py).
//
// Measurement.  Draw k uses the stream t = s.indexed(k): the weights as draw_recurrent
// draws them from t, inputs N(0, E[x^2]) from t.named("input") as a [T input_width,
// batch] matrix (row t input_width + j is feature j at step t) and the loss gradient at
// the last state N(0, 1) from t.named("output_gradient"), [hidden, batch].  The draws
// are tasks of the executor and each sums in a fixed order, so the results are the same
// bits on any executor.  The verdict on each gate and step is measure.hpp's rule: x_k =
// ln(m_k / p_k) over the K draws (p_k the prediction from draw k's measured state), a
// Student's t band with the false-alarm rate split (Bonferroni) over the T G gate
// comparisons (only the gates have a prediction), plus a finite-width allowance of
// c / hidden.
// False-alarm rate, measured (tests/propagate/recurrent.cpp, "rate: ..."): 100 LSTM and
// 100 GRU cells of 16 units over 20 steps, 8 draws of 16 samples, no allowance: nominal
// 0.2 a table -> observed 0.19 (0.0038 a row against a nominal 0.003); with the defaults
// no NO in 14000 rows.  Power: at 8 draws of 32 samples a row's band is about x/1.17; a
// recurrent gain of 2 assumed to be 1 fails 114 of 200 rows of a 64-unit LSTM over 50
// steps, a gain of 3 fails 195.
#ifndef KINDLING_PROPAGATE_RECURRENT_HPP
#define KINDLING_PROPAGATE_RECURRENT_HPP

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <functional>
#include <stdexcept>
#include <string>
#include <vector>

#include "measure.hpp"

namespace kindling {

/// The kind of recurrent cell; its gate blocks in this order (see the header comment).
enum class cell_kind { lstm, gru };

inline const char* cell_kind_name(cell_kind k) { return k == cell_kind::lstm ? "lstm" : "gru"; }
inline std::uint64_t gate_blocks(cell_kind k) { return k == cell_kind::lstm ? 4 : 3; }
/// The names of the gate blocks, in block order.
inline std::vector<std::string> gate_names(cell_kind k) {
  if (k == cell_kind::lstm) return {"input", "forget", "candidate", "output"};
  return {"reset", "update", "candidate"};
}
/// The block holding the forget bias: LSTM forget, GRU update.
inline std::uint64_t keep_gate(cell_kind) { return 1; }

/// A scheme bound to one packed weight: the name, the per-element variance it draws for
/// one gate block, and how it fills the whole packed weight (initialize(), one sub-stream
/// a block).
struct packed_scheme {
  std::string name;
  double variance = 0;
  std::function<void(const strided_view<double>&, const stream&)> draw;

  template <class Scheme>
  static packed_scheme of(const Scheme& scheme, const packed_dense& layer) {
    packed_scheme p;
    p.name = scheme.name();
    p.variance = weight_variance_of(scheme, layer.block(0).block_fans);
    p.draw = [scheme, layer](const strided_view<double>& w, const stream& s) { initialize(w, layer, scheme, s); };
    return p;
  }
};

/// A recurrent cell unrolled over `steps` time steps: its sizes, the schemes of its
/// input and recurrent weights (orthogonal by default for the recurrent one) and the
/// forget bias.
class recurrent_cell {
 public:
  template <class InputScheme, class RecurrentScheme = orthogonal>
  recurrent_cell(cell_kind kind, std::uint64_t input_width, std::uint64_t hidden, std::uint64_t steps,
                 const InputScheme& input_scheme, const RecurrentScheme& recurrent_scheme = orthogonal{},
                 double forget_bias = 1.0, std::string label = "cell")
      : recurrent_cell(checked(kind, input_width, hidden, steps, forget_bias), input_width, hidden, steps,
                       bind(input_scheme, checked(kind, input_width, hidden, steps, forget_bias), input_width, hidden),
                       bind(recurrent_scheme, checked(kind, input_width, hidden, steps, forget_bias), hidden, hidden),
                       forget_bias, std::move(label), 0) {}

  /// The same from schemes already bound to the cell's packed weights (e.g. chosen by
  /// name at run time): input [G hidden, input_width], recurrent [G hidden, hidden].
  recurrent_cell(cell_kind kind, std::uint64_t input_width, std::uint64_t hidden, std::uint64_t steps,
                 packed_scheme input, packed_scheme recurrent, double forget_bias, std::string label)
      : recurrent_cell(checked(kind, input_width, hidden, steps, forget_bias), input_width, hidden, steps,
                       std::move(input), std::move(recurrent), forget_bias, std::move(label), 0) {}

 private:
  recurrent_cell(cell_kind kind, std::uint64_t input_width, std::uint64_t hidden, std::uint64_t steps,
                 packed_scheme input, packed_scheme recurrent, double forget_bias, std::string label, int /* tag */)
      : kind_(kind), input_width_(input_width), hidden_(hidden), steps_(steps), forget_bias_(forget_bias),
        label_(std::move(label)), input_variance_(input.variance), recurrent_variance_(recurrent.variance),
        input_scheme_name_(std::move(input.name)), recurrent_scheme_name_(std::move(recurrent.name)),
        draw_input_(std::move(input.draw)), draw_recurrent_(std::move(recurrent.draw)) {}

  // Arguments are checked (by `checked`, inside each argument: their order of evaluation
  // is unspecified) before a packed weight is described.
  template <class Scheme>
  static packed_scheme bind(const Scheme& scheme, cell_kind kind, std::uint64_t in, std::uint64_t hidden) {
    return packed_scheme::of(scheme, packed_dense(gate_blocks(kind), in, hidden));
  }

  static cell_kind checked(cell_kind kind, std::uint64_t input_width, std::uint64_t hidden, std::uint64_t steps,
                           double forget_bias) {
    constexpr const char* where = "kindling::recurrent_cell";
    detail::require_positive(input_width, where, "input_width");
    detail::require_positive(hidden, where, "hidden");
    detail::require_positive(steps, where, "steps");
    if (!std::isfinite(forget_bias)) {
      throw std::domain_error(std::string(where) + ": argument 'forget_bias' = " +
                              detail::argument_text(forget_bias) + ", expected a finite number");
    }
    const std::uint64_t cap = std::uint64_t{1} << 20;
    if (hidden > cap || input_width > cap || steps > cap) {
      const char* name = hidden > cap ? "hidden" : input_width > cap ? "input_width" : "steps";
      const std::uint64_t v = hidden > cap ? hidden : input_width > cap ? input_width : steps;
      throw std::length_error(std::string(where) + ": argument '" + name + "' = " + std::to_string(v) +
                              ", expected at most 2^20");
    }
    return kind;
  }

 public:
  cell_kind kind() const noexcept { return kind_; }
  std::uint64_t input_width() const noexcept { return input_width_; }
  std::uint64_t hidden() const noexcept { return hidden_; }
  std::uint64_t steps() const noexcept { return steps_; }
  std::uint64_t gates() const noexcept { return gate_blocks(kind_); }
  double forget_bias() const noexcept { return forget_bias_; }
  const std::string& label() const noexcept { return label_; }
  /// Var W and Var U per element, as the schemes draw them for one gate block.
  double input_weight_variance() const noexcept { return input_variance_; }
  double recurrent_weight_variance() const noexcept { return recurrent_variance_; }
  /// sigma_x^2 = input_width Var W and sigma_h^2 = hidden Var U.
  double input_scale() const noexcept { return static_cast<double>(input_width_) * input_variance_; }
  double recurrent_scale() const noexcept { return static_cast<double>(hidden_) * recurrent_variance_; }
  const std::string& input_scheme() const noexcept { return input_scheme_name_; }
  const std::string& recurrent_scheme() const noexcept { return recurrent_scheme_name_; }

  /// The predicted second moment of a gate's pre-activation (less its bias) at a step
  /// whose inputs have second moment `input_moment` and whose block reads a state of
  /// second moment `state_moment` (Chen, Pennington & Schoenholz, ICML 2018).
  double gate_moment(double input_moment, double state_moment) const {
    return input_scale() * input_moment + recurrent_scale() * state_moment;
  }

  void draw_input_weight(const strided_view<double>& w, const stream& s) const { draw_input_(w, s); }
  void draw_recurrent_weight(const strided_view<double>& w, const stream& s) const { draw_recurrent_(w, s); }

 private:
  cell_kind kind_;
  std::uint64_t input_width_, hidden_, steps_;
  double forget_bias_;
  std::string label_;
  double input_variance_ = 0, recurrent_variance_ = 0;
  std::string input_scheme_name_, recurrent_scheme_name_;
  std::function<void(const strided_view<double>&, const stream&)> draw_input_, draw_recurrent_;
};

/// The parameters of a cell, drawn: W [G H, input_width], U [G H, hidden], b [G H].
struct realized_cell {
  Eigen::MatrixXd input_weight, recurrent_weight;
  Eigen::VectorXd bias;
};

/// Draws a cell's weights from stream s (`label.input_weight`, `label.recurrent_weight`);
/// the bias is zero but for `forget_bias` on the keep gate's block.
inline realized_cell draw_recurrent(const recurrent_cell& cell, const stream& s) {
  const auto g = static_cast<Eigen::Index>(cell.gates()), h = static_cast<Eigen::Index>(cell.hidden());
  realized_cell r;
  r.input_weight.resize(g * h, static_cast<Eigen::Index>(cell.input_width()));
  r.recurrent_weight.resize(g * h, h);
  cell.draw_input_weight(view_of(r.input_weight), s.named(cell.label() + ".input_weight"));
  cell.draw_recurrent_weight(view_of(r.recurrent_weight), s.named(cell.label() + ".recurrent_weight"));
  r.bias = Eigen::VectorXd::Zero(g * h);
  r.bias.segment(static_cast<Eigen::Index>(keep_gate(cell.kind())) * h, h).setConstant(cell.forget_bias());
  return r;
}

/// Per step, the second moments of one pass (mean over units and samples).
struct recurrent_moments {
  std::vector<std::vector<double>> gates;   // [step][block]: E[(z - b)^2]
  std::vector<std::vector<double>> reads;   // [step][block]: E[v^2] of the state the block read
  std::vector<double> state;                // E[h_t^2]
  std::vector<double> cell;                 // E[c_t^2] (LSTM; empty for GRU)
  std::vector<double> state_gradient;       // E[(dL/dh_t)^2], the loss on h_{T-1}
  std::vector<double> cell_gradient;        // E[(dL/dc_t)^2] (LSTM)
};

namespace detail {
inline Eigen::MatrixXd logistic(const Eigen::MatrixXd& z) {
  return z.unaryExpr([](double v) { return 1.0 / (1.0 + std::exp(-v)); });
}
inline Eigen::MatrixXd hyperbolic_tangent(const Eigen::MatrixXd& z) {
  return z.unaryExpr([](double v) { return std::tanh(v); });
}
inline double mean_square(const Eigen::MatrixXd& m) { return m.squaredNorm() / static_cast<double>(m.size()); }
}  // namespace detail

/// One pass of `batch` samples through the unrolled cell: forward over the T steps from
/// `input` ([T input_width, batch]), then back through time from `output_gradient`
/// (dL/dh_{T-1}, [hidden, batch]).
inline recurrent_moments run_recurrent(const recurrent_cell& cell, const realized_cell& net,
                                       const Eigen::MatrixXd& input, const Eigen::MatrixXd& output_gradient) {
  constexpr const char* where = "kindling::run_recurrent";
  const auto H = static_cast<Eigen::Index>(cell.hidden()), G = static_cast<Eigen::Index>(cell.gates());
  const auto n = static_cast<Eigen::Index>(cell.input_width());
  const auto T = static_cast<std::size_t>(cell.steps());
  if (net.input_weight.rows() != G * H || net.input_weight.cols() != n || net.recurrent_weight.rows() != G * H ||
      net.recurrent_weight.cols() != H || net.bias.size() != G * H) {
    detail::reject_argument<std::invalid_argument>(
        where, "net",
        "weights of " + std::to_string(net.input_weight.rows()) + " x " + std::to_string(net.input_weight.cols()) +
            " and " + std::to_string(net.recurrent_weight.rows()) + " x " + std::to_string(net.recurrent_weight.cols()) +
            " and a bias of " + std::to_string(net.bias.size()),
        std::to_string(G * H) + " x " + std::to_string(n) + " and " + std::to_string(G * H) + " x " +
            std::to_string(H) + " and " + std::to_string(G * H));
  }
  if (input.rows() != n * static_cast<Eigen::Index>(T) || input.cols() == 0) {
    detail::reject_argument<std::invalid_argument>(
        where, "input", std::to_string(input.rows()) + " x " + std::to_string(input.cols()),
        std::to_string(n * static_cast<Eigen::Index>(T)) + " rows (steps x input_width) and at least one column");
  }
  const Eigen::Index B = input.cols();
  if (output_gradient.rows() != H || output_gradient.cols() != B) {
    detail::reject_argument<std::invalid_argument>(
        where, "output_gradient", std::to_string(output_gradient.rows()) + " x " + std::to_string(output_gradient.cols()),
        std::to_string(H) + " x " + std::to_string(B));
  }
  const bool lstm = cell.kind() == cell_kind::lstm;
  recurrent_moments m;
  m.gates.assign(T, std::vector<double>(static_cast<std::size_t>(G), 0.0));
  m.reads = m.gates;
  m.state.assign(T, 0.0);
  m.state_gradient.assign(T, 0.0);
  if (lstm) {
    m.cell.assign(T, 0.0);
    m.cell_gradient.assign(T, 0.0);
  }
  // Kept for the backward pass: activated gates [G H, B] and states before each step.
  std::vector<Eigen::MatrixXd> act(T), h_before(T), c_before(T), c_after(T);
  Eigen::MatrixXd h = Eigen::MatrixXd::Zero(H, B), c = Eigen::MatrixXd::Zero(H, B);
  for (std::size_t t = 0; t < T; ++t) {
    h_before[t] = h;
    Eigen::MatrixXd z = net.input_weight * input.middleRows(static_cast<Eigen::Index>(t) * n, n);
    const double h2 = detail::mean_square(h);
    if (lstm) {
      z.noalias() += net.recurrent_weight * h;
      for (Eigen::Index k = 0; k < G; ++k) {
        m.gates[t][static_cast<std::size_t>(k)] = detail::mean_square(z.middleRows(k * H, H));
        m.reads[t][static_cast<std::size_t>(k)] = h2;
      }
      z.colwise() += net.bias;
      Eigen::MatrixXd a(G * H, B);
      a.topRows(2 * H) = detail::logistic(z.topRows(2 * H));
      a.middleRows(2 * H, H) = detail::hyperbolic_tangent(z.middleRows(2 * H, H));
      a.bottomRows(H) = detail::logistic(z.bottomRows(H));
      c_before[t] = c;
      c = a.middleRows(H, H).cwiseProduct(c) + a.topRows(H).cwiseProduct(a.middleRows(2 * H, H));
      c_after[t] = c;
      h = a.bottomRows(H).cwiseProduct(detail::hyperbolic_tangent(c));
      m.cell[t] = detail::mean_square(c);
      act[t] = std::move(a);
    } else {
      z.topRows(2 * H).noalias() += net.recurrent_weight.topRows(2 * H) * h;
      Eigen::MatrixXd a(G * H, B);
      a.topRows(2 * H) = detail::logistic((z.topRows(2 * H)).colwise() + net.bias.head(2 * H));
      const Eigen::MatrixXd rh = a.topRows(H).cwiseProduct(h);
      z.bottomRows(H).noalias() += net.recurrent_weight.bottomRows(H) * rh;
      for (Eigen::Index k = 0; k < G; ++k) m.gates[t][static_cast<std::size_t>(k)] = detail::mean_square(z.middleRows(k * H, H));
      m.reads[t] = {h2, h2, detail::mean_square(rh)};
      a.bottomRows(H) = detail::hyperbolic_tangent(z.bottomRows(H).colwise() + net.bias.tail(H));
      const auto u = a.middleRows(H, H);
      h = u.cwiseProduct(h) + (Eigen::MatrixXd::Ones(H, B) - u).cwiseProduct(a.bottomRows(H));
      act[t] = std::move(a);
    }
    m.state[t] = detail::mean_square(h);
  }
  // Back through time: dh = dL/dh_t, dc = dL/dc_t (only the loss on h_{T-1}).
  Eigen::MatrixXd dh = output_gradient, dc = Eigen::MatrixXd::Zero(H, B);
  for (std::size_t t = T; t-- > 0;) {
    m.state_gradient[t] = detail::mean_square(dh);
    const Eigen::MatrixXd& a = act[t];
    Eigen::MatrixXd dz(G * H, B);
    if (lstm) {
      const Eigen::MatrixXd tc = detail::hyperbolic_tangent(c_after[t]);
      const auto i = a.topRows(H), f = a.middleRows(H, H), g = a.middleRows(2 * H, H), o = a.bottomRows(H);
      dc += dh.cwiseProduct(o).cwiseProduct((1.0 - tc.array().square()).matrix());
      m.cell_gradient[t] = detail::mean_square(dc);
      dz.topRows(H) = dc.cwiseProduct(g).cwiseProduct((i.array() * (1.0 - i.array())).matrix());
      dz.middleRows(H, H) = dc.cwiseProduct(c_before[t]).cwiseProduct((f.array() * (1.0 - f.array())).matrix());
      dz.middleRows(2 * H, H) = dc.cwiseProduct(i).cwiseProduct((1.0 - g.array().square()).matrix());
      dz.bottomRows(H) = dh.cwiseProduct(tc).cwiseProduct((o.array() * (1.0 - o.array())).matrix());
      dc = dc.cwiseProduct(f).eval();
      dh.noalias() = net.recurrent_weight.transpose() * dz;
    } else {
      const Eigen::MatrixXd& hp = h_before[t];
      const auto r = a.topRows(H), u = a.middleRows(H, H), nn = a.bottomRows(H);
      dz.bottomRows(H) = dh.cwiseProduct((Eigen::MatrixXd::Ones(H, B) - u))
                             .cwiseProduct((1.0 - nn.array().square()).matrix());
      dz.middleRows(H, H) = dh.cwiseProduct(hp - nn).cwiseProduct((u.array() * (1.0 - u.array())).matrix());
      const Eigen::MatrixXd drh = net.recurrent_weight.bottomRows(H).transpose() * dz.bottomRows(H);
      dz.topRows(H) = drh.cwiseProduct(hp).cwiseProduct((r.array() * (1.0 - r.array())).matrix());
      Eigen::MatrixXd back = dh.cwiseProduct(u) + drh.cwiseProduct(r);
      back.noalias() += net.recurrent_weight.topRows(2 * H).transpose() * dz.topRows(2 * H);
      dh = std::move(back);
    }
  }
  return m;
}

struct recurrent_options {
  std::size_t trials = 8;               // independent draws, at least 2
  double false_alarm = 1e-3;            // for all the gate comparisons together, in (0, 1)
  double finite_width_allowance = 1.0;  // c >= 0: the band widens by c / hidden
  double input_second_moment = 1.0;     // E[x^2] of the inputs
};

/// One gate at one step: measured against the prediction (measured_moment from
/// measure.hpp, in ratios: `predicted` is 1 and `draws` are m_k / p_k).
struct recurrent_report {
  std::vector<std::vector<measured_moment>> gates;  // [step][block]
  std::vector<recurrent_moments> draws;             // per draw, everything measured
  std::size_t trials = 0;
  std::uint64_t batch = 0;
  double quantile = 0;
  bool gates_agree() const {
    for (const auto& step : gates)
      for (const auto& g : step)
        if (!g.agrees) return false;
    return true;
  }
  /// The median over draws of one measured series (e.g. &recurrent_moments::state) at step t.
  double median(std::vector<double> recurrent_moments::*series, std::size_t t) const {
    std::vector<double> v;
    for (const auto& d : draws) v.push_back((d.*series).at(t));
    std::sort(v.begin(), v.end());
    const std::size_t k = v.size();
    return k % 2 == 1 ? v[k / 2] : 0.5 * (v[k / 2 - 1] + v[k / 2]);
  }
};

namespace detail {
inline recurrent_moments measure_recurrent_draw(const recurrent_cell& cell, const stream& t, std::uint64_t batch,
                                                double input_moment) {
  const realized_cell net = draw_recurrent(cell, t);
  Eigen::MatrixXd x(static_cast<Eigen::Index>(cell.steps() * cell.input_width()), static_cast<Eigen::Index>(batch));
  fill(view_of(x), dist::normal{0.0, std::sqrt(input_moment)}, t.named("input"));
  Eigen::MatrixXd g(static_cast<Eigen::Index>(cell.hidden()), static_cast<Eigen::Index>(batch));
  fill(view_of(g), dist::normal{0.0, 1.0}, t.named("output_gradient"));
  return run_recurrent(cell, net, x, g);
}
}  // namespace detail

/// Draws `measured` options.trials times (draw k from s.indexed(k)), runs `batch` samples
/// through each, and judges every gate at every step against the prediction of
/// `predicted` (a cell of the same kind and sizes; usually the same cell) from the state
/// moments of that draw.
template <class Exec = serial_executor>
recurrent_report compare_recurrent(const recurrent_cell& measured, const recurrent_cell& predicted, std::uint64_t batch,
                                   const stream& s, const recurrent_options& options = {}, Exec&& exec = Exec{}) {
  constexpr const char* where = "kindling::compare_recurrent";
  if (predicted.kind() != measured.kind() || predicted.hidden() != measured.hidden() ||
      predicted.input_width() != measured.input_width() || predicted.steps() != measured.steps()) {
    detail::reject_argument<std::invalid_argument>(
        where, "predicted",
        std::string("a ") + cell_kind_name(predicted.kind()) + " cell of hidden " + std::to_string(predicted.hidden()),
        std::string("the kind and sizes of argument 'measured' (") + cell_kind_name(measured.kind()) + ", hidden " +
            std::to_string(measured.hidden()) + ")");
  }
  detail::check_fed_pass_options(options, batch, "sample", where);
  recurrent_report report;
  report.trials = options.trials;
  report.batch = batch;
  report.draws.resize(options.trials);
  const auto task = [&](std::size_t k) {
    report.draws[k] = detail::measure_recurrent_draw(measured, s.indexed(k), batch, options.input_second_moment);
  };
  exec(options.trials, std::function<void(std::size_t)>(task));
  const std::size_t T = static_cast<std::size_t>(measured.steps()), G = static_cast<std::size_t>(measured.gates());
  report.quantile = detail::student_t_two_sided(options.false_alarm / static_cast<double>(T * G), options.trials - 1);
  const double allowance = options.finite_width_allowance / static_cast<double>(measured.hidden());
  report.gates.assign(T, {});
  for (std::size_t t = 0; t < T; ++t) {
    for (std::size_t b = 0; b < G; ++b) {
      std::vector<double> ratios(options.trials);
      for (std::size_t k = 0; k < options.trials; ++k) {
        const recurrent_moments& d = report.draws[k];
        ratios[k] = d.gates[t][b] / predicted.gate_moment(options.input_second_moment, d.reads[t][b]);
      }
      report.gates[t].push_back(detail::judge_moment(1.0, std::move(ratios), report.quantile, allowance));
    }
  }
  return report;
}

/// The same with the cell's own prediction.
template <class Exec = serial_executor>
recurrent_report compare_recurrent(const recurrent_cell& cell, std::uint64_t batch, const stream& s,
                                   const recurrent_options& options = {}, Exec&& exec = Exec{}) {
  return compare_recurrent(cell, cell, batch, s, options, std::forward<Exec>(exec));
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_RECURRENT_HPP
