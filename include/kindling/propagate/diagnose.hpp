// kindling/propagate/diagnose.hpp (Eigen): symmetry and saddle diagnostics that need a
// pass through the network -- things a look at the weights alone cannot settle.  Run a
// batch forward and a loss gradient back through a realized dense stack (measure.hpp's
// run_pass), then check four things, each a finding of an audit_report
// (audit/result.hpp) with one sentence per failure:
//
//   zero-weight-gradients  a layer whose weight gradient dL/dW_l = delta_l a_{l-1}^T / B
//                          is zero for the whole batch.  When every layer's is, the
//                          network sits on a saddle: all-zero weights with tanh (phi(0) =
//                          0) pass neither a signal forward nor a gradient back, so no
//                          weight ever moves (common practice).
//   identical-units        hidden units with the same pre-activation AND the same
//                          gradient on every sample.  They compute one function and get
//                          one update, so plain gradient descent keeps them identical:
//                          equal (or zero) incoming weights leave hidden units identical
//                          (common practice).  Both rows are compared, because units that
//                          only share a zero gradient (several dead ReLUs) are a different
//                          fault, reported below.
//   dead-units             units whose slope phi'(h) is exactly 0 on every sample (ReLU
//                          units below zero for the whole batch): they pass no gradient
//                          and their incoming weights never change.
//   saturated-units        for saturating activations (slope vanishing at both ends,
//                          e.g. sigmoid and tanh: |phi'(+-30)| <= 1e-6 |phi'(0)|), units
//                          with |phi'(h)| < saturation_slope |phi'(0)| on at least
//                          saturated_fraction of the batch (Glorot & Bengio 2010 saw the
//                          top sigmoid layer of a deep net saturate this way; from memory).
//
// The output layer is left out of identical-units (its units have different targets);
// every layer is checked for the other three.  Two rows count as equal when their
// largest difference is at most options.identical times their largest entry (Eigen's
// products may round rows that are mathematically equal differently in the last bit).
#ifndef KINDLING_PROPAGATE_DIAGNOSE_HPP
#define KINDLING_PROPAGATE_DIAGNOSE_HPP

#include <Eigen/Dense>

#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include "../audit/result.hpp"
#include "measure.hpp"

namespace kindling {

struct diagnosis_options {
  double zero_gradient = 0.0;        // max |dL/dW_l| at or below this counts as zero
  double identical = 1e-9;           // relative tolerance for equal rows
  double saturation_slope = 0.01;    // saturated: |phi'(h)| below this fraction of |phi'(0)| ...
  double saturated_fraction = 0.95;  // ... on at least this fraction of the batch
};

namespace detail {

inline void check_diagnosis_options(const diagnosis_options& o, const char* where) {
  const auto bad = [where](const char* arg, double v, const char* expected) {
    return std::domain_error(argument_message(where, std::string("options.") + arg, argument_text(v), expected));
  };
  if (!(std::isfinite(o.zero_gradient) && o.zero_gradient >= 0.0)) throw bad("zero_gradient", o.zero_gradient, "a finite number >= 0");
  if (!(std::isfinite(o.identical) && o.identical >= 0.0 && o.identical < 1.0)) throw bad("identical", o.identical, "a number in [0, 1)");
  if (!(o.saturation_slope > 0.0 && o.saturation_slope < 1.0)) throw bad("saturation_slope", o.saturation_slope, "a number in (0, 1)");
  if (!(o.saturated_fraction > 0.0 && o.saturated_fraction <= 1.0)) {
    throw bad("saturated_fraction", o.saturated_fraction, "a number in (0, 1]");
  }
}

inline bool rows_equal(const Eigen::MatrixXd& m, Eigen::Index i, Eigen::Index j, double tol) {
  const double scale = std::max(m.row(i).cwiseAbs().maxCoeff(), m.row(j).cwiseAbs().maxCoeff());
  for (Eigen::Index c = 0; c < m.cols(); ++c) {
    if (std::fabs(m(i, c) - m(j, c)) > tol * scale) return false;  // early exit: distinct rows cost little
  }
  return true;
}

// Groups of two or more units whose pre-activation and gradient rows are both equal:
// each unit is compared with the first unit of every group found so far.
inline std::vector<std::vector<Eigen::Index>> identical_groups(const Eigen::MatrixXd& pre, const Eigen::MatrixXd& grad,
                                                               double tol) {
  std::vector<std::vector<Eigen::Index>> groups;
  for (Eigen::Index i = 0; i < pre.rows(); ++i) {
    bool placed = false;
    for (auto& g : groups) {
      if (rows_equal(pre, g.front(), i, tol) && rows_equal(grad, g.front(), i, tol)) {
        g.push_back(i);
        placed = true;
        break;
      }
    }
    if (!placed) groups.push_back({i});
  }
  std::vector<std::vector<Eigen::Index>> out;
  for (auto& g : groups) if (g.size() > 1) out.push_back(std::move(g));
  return out;
}

inline std::string unit_list(const std::vector<Eigen::Index>& units) {
  std::string s;
  for (std::size_t k = 0; k < units.size() && k < 8; ++k) s += (k ? ", " : "") + std::to_string(units[k]);
  if (units.size() > 8) s += ", ...";
  return s;
}

inline std::string percent(std::size_t part, std::uint64_t whole) {
  return short_number(100.0 * static_cast<double>(part) / static_cast<double>(whole)) + "%";
}

inline bool saturates(const nonlinearity& phi) {
  const double peak = std::fabs(phi.slope(0.0));
  return peak > 0.0 && std::fabs(phi.slope(30.0)) <= 1e-6 * peak && std::fabs(phi.slope(-30.0)) <= 1e-6 * peak;
}

inline void check_pass_record(const layer_stack& stack, const Eigen::MatrixXd& input, const pass_record& rec,
                              const char* where) {
  const auto& layers = stack.layers();
  if (rec.pre.size() != layers.size() || rec.grad.size() != layers.size()) {
    reject_argument<std::invalid_argument>(
        where, "record",
        std::to_string(rec.pre.size()) + " pre-activation and " + std::to_string(rec.grad.size()) + " gradient matrices",
        std::to_string(layers.size()) + " of each (one per layer of the stack)");
  }
  for (std::size_t l = 0; l < layers.size(); ++l) {
    const Eigen::Index w = eigen_index(layers[l].width);
    if (rec.pre[l].rows() != w || rec.grad[l].rows() != w || rec.pre[l].cols() != input.cols() ||
        rec.grad[l].cols() != input.cols()) {
      reject_argument<std::invalid_argument>(
          where, "record.pre[" + std::to_string(l) + "]",
          std::to_string(rec.pre[l].rows()) + " x " + std::to_string(rec.pre[l].cols()) + " (gradient " +
              std::to_string(rec.grad[l].rows()) + " x " + std::to_string(rec.grad[l].cols()) + ")",
          std::to_string(w) + " x " + std::to_string(input.cols()) + " for both");
    }
  }
}

// The arguments of diagnose_pass, checked before any work.
inline void check_diagnosis_arguments(const layer_stack& stack, const realized_stack& net, const Eigen::MatrixXd& input,
                                      const pass_record& record, const diagnosis_options& options, const char* where) {
  require_dense_stack(stack, where);
  check_diagnosis_options(options, where);
  if (input.rows() != eigen_index(stack.input_units()) || input.cols() == 0) {
    reject_argument<std::invalid_argument>(where, "input",
                                           std::to_string(input.rows()) + " x " + std::to_string(input.cols()),
                                           std::to_string(stack.input_units()) + " rows and at least one column");
  }
  if (net.weights.size() != stack.depth()) {
    reject_argument<std::invalid_argument>(where, "net", std::to_string(net.weights.size()) + " weights",
                                           std::to_string(stack.depth()) + " (one per layer of the stack)");
  }
  check_pass_record(stack, input, record, where);
}

// zero-weight-gradients: dL/dW_l = delta_l a_{l-1}^T / B for each layer.
inline audit_finding zero_gradient_finding(const layer_stack& stack, const Eigen::MatrixXd& input,
                                           const pass_record& record, const diagnosis_options& options) {
  const auto& layers = stack.layers();
  const std::size_t n = layers.size();
  std::vector<std::string> zero_layers;
  for (std::size_t l = 0; l < n; ++l) {
    const Eigen::MatrixXd a =
        l == 0 ? input : Eigen::MatrixXd(record.pre[l - 1].unaryExpr([&](double v) { return layers[l - 1].act(v); }));
    const Eigen::MatrixXd g = record.grad[l] * a.transpose() / static_cast<double>(input.cols());
    if (g.cwiseAbs().maxCoeff() <= options.zero_gradient) zero_layers.push_back(layers[l].label);
  }
  audit_finding f;
  f.check = "zero-weight-gradients";
  f.statistic = static_cast<double>(zero_layers.size());
  f.passed = zero_layers.empty();
  if (f.passed) {
    f.sentence = "every layer has a nonzero weight gradient";
  } else if (zero_layers.size() == n) {
    f.sentence = "every weight gradient is zero (all " + std::to_string(n) +
                 " layers): the network sits on a saddle where gradient descent cannot move any weight -- "
                 "with all-zero weights and an activation with phi(0) = 0 (tanh) no signal goes forward and "
                 "no gradient comes back; draw the weights at random (Glorot, He)";
  } else {
    std::string names;
    for (std::size_t k = 0; k < zero_layers.size(); ++k) names += (k ? ", " : "") + ("'" + zero_layers[k] + "'");
    f.sentence = "the weight gradient is zero for the whole batch in layer" +
                 std::string(zero_layers.size() > 1 ? "s " : " ") + names +
                 ": these weights will not move (zero weights above them, or units that pass no gradient)";
  }
  return f;
}

// identical-units, on the hidden layers (the output units have different targets).
inline audit_finding identical_units_finding(const layer_stack& stack, const pass_record& record,
                                             const diagnosis_options& options) {
  const auto& layers = stack.layers();
  std::string details;
  std::size_t affected = 0;
  for (std::size_t l = 0; l + 1 < layers.size(); ++l) {
    const auto groups = identical_groups(record.pre[l], record.grad[l], options.identical);
    if (groups.empty()) continue;
    std::size_t units = 0, largest = 0;
    for (const auto& g : groups) {
      units += g.size();
      if (g.size() > groups[largest].size()) largest = static_cast<std::size_t>(&g - groups.data());
    }
    affected += units;
    if (!details.empty()) details += "; ";
    const std::uint64_t width = layers[l].width;
    if (groups.size() == 1 && units == width) {
      details += "in layer '" + layers[l].label + "' all " + std::to_string(width) +
                 " units have the same pre-activation and gradient on every sample (the layer acts as one unit)";
    } else {
      details += "in layer '" + layers[l].label + "' " + std::to_string(units) + " of " + std::to_string(width) +
                 " units fall in " + std::to_string(groups.size()) + " group" + (groups.size() > 1 ? "s" : "") +
                 " of identical units (largest: units " + unit_list(groups[largest]) + ")";
    }
  }
  audit_finding f;
  f.check = "identical-units";
  f.statistic = static_cast<double>(affected);
  f.passed = affected == 0;
  f.sentence = f.passed ? "no two hidden units compute the same function on the batch"
                        : "symmetry not broken: " + details +
                              "; identical units get identical updates and stay identical under gradient "
                              "descent (equal or zero weights; draw them at random)";
  return f;
}

// Units of one kind (dead or saturated) over the layers: their count and one text part a layer.
struct unit_tally {
  std::size_t total = 0;
  std::string text;

  void add(const stack_layer& layer, const std::vector<Eigen::Index>& units) {
    if (units.empty()) return;
    total += units.size();
    if (!text.empty()) text += "; ";
    text += "layer '" + layer.label + "' (" + layer.act.name() + "): " + std::to_string(units.size()) + " of " +
            std::to_string(layer.width) + " units (" + percent(units.size(), layer.width) + ", units " +
            unit_list(units) + ")";
  }
};

// dead-units and saturated-units: the slope phi'(h) of each unit on each sample. A
// saturating activation is checked for saturation, any other for dead units.
inline std::pair<audit_finding, audit_finding> slope_findings(const layer_stack& stack, const pass_record& record,
                                                              const diagnosis_options& options) {
  const auto batch = static_cast<std::uint64_t>(record.pre.front().cols());
  unit_tally dead_units, saturated_units;
  for (std::size_t l = 0; l < stack.layers().size(); ++l) {
    const stack_layer& layer = stack.layers()[l];
    const nonlinearity& phi = layer.act;
    const bool saturating = saturates(phi);
    const double limit = options.saturation_slope * std::fabs(phi.slope(0.0));
    std::vector<Eigen::Index> dead, saturated;
    const Eigen::MatrixXd& h = record.pre[l];
    for (Eigen::Index i = 0; i < h.rows(); ++i) {
      std::uint64_t zero = 0, low = 0;
      for (Eigen::Index b = 0; b < h.cols(); ++b) {
        const double s = std::fabs(phi.slope(h(i, b)));
        zero += s == 0.0;
        low += s < limit;
      }
      if (saturating) {
        if (static_cast<double>(low) >= options.saturated_fraction * static_cast<double>(batch)) saturated.push_back(i);
      } else if (zero == batch) {
        dead.push_back(i);
      }
    }
    dead_units.add(layer, dead);
    saturated_units.add(layer, saturated);
  }
  audit_finding dead;
  dead.check = "dead-units";
  dead.statistic = static_cast<double>(dead_units.total);
  dead.passed = dead_units.total == 0;
  dead.sentence = dead.passed ? "no unit is dead for the whole batch"
                              : "dead units, slope phi'(h) = 0 on all " + std::to_string(batch) +
                                    " samples, so they pass no gradient and their incoming weights never change: " +
                                    dead_units.text + " (negative biases, or weights too large for the input scale)";
  audit_finding sat;
  sat.check = "saturated-units";
  sat.statistic = static_cast<double>(saturated_units.total);
  sat.passed = saturated_units.total == 0;
  sat.sentence = sat.passed ? "no saturating unit is saturated on the batch"
                            : "saturated units, |phi'(h)| below " + short_number(100.0 * options.saturation_slope) +
                                  "% of phi'(0) on at least " + short_number(100.0 * options.saturated_fraction) +
                                  "% of the batch, so their gradients nearly vanish: " + saturated_units.text +
                                  " (the pre-activations are too large: standardize the inputs, or lower the "
                                  "weight and bias scale)";
  return {std::move(dead), std::move(sat)};
}

}  // namespace detail

/// The diagnostics from a pass already run (run_pass on `net` with `input`): for a
/// trainer that has the pass at hand anyway.
inline audit_report diagnose_pass(const layer_stack& stack, const realized_stack& net, const Eigen::MatrixXd& input,
                                  const pass_record& record, const diagnosis_options& options = {}) {
  detail::check_diagnosis_arguments(stack, net, input, record, options, "kindling::diagnose_pass");
  audit_report report("pass diagnostics of a " + std::to_string(stack.layers().size()) +
                      "-layer stack on a batch of " + std::to_string(input.cols()));
  report.add(detail::zero_gradient_finding(stack, input, record, options));
  report.add(detail::identical_units_finding(stack, record, options));
  auto slopes = detail::slope_findings(stack, record, options);
  report.add(std::move(slopes.first));
  report.add(std::move(slopes.second));
  return report;
}

/// Runs the pass (input and output gradient given, e.g. the trainer's batch and its
/// loss gradient) and diagnoses it.
template <class Exec = serial_executor>
audit_report diagnose_pass(const layer_stack& stack, const realized_stack& net, const Eigen::MatrixXd& input,
                           const Eigen::MatrixXd& output_gradient, const diagnosis_options& options = {},
                           Exec&& exec = Exec{}) {
  detail::check_diagnosis_options(options, "kindling::diagnose_pass");
  const pass_record rec = run_pass(stack, net, input, output_gradient, std::forward<Exec>(exec));
  return diagnose_pass(stack, net, input, rec, options);
}

/// At initialization, with no data: a batch of `batch` inputs N(0, input second
/// moment) from s.named("input") and output gradients N(0, 1) from
/// s.named("output_gradient"), as compare_propagation draws them in each of its draws
/// (draw k: net = realize(stack, s.indexed(k)) and this with s.indexed(k)).
template <class Exec = serial_executor>
audit_report diagnose_initialization(const layer_stack& stack, const realized_stack& net, std::uint64_t batch,
                                     const stream& s, const diagnosis_options& options = {}, Exec&& exec = Exec{}) {
  constexpr const char* where = "kindling::diagnose_initialization";
  detail::require_dense_stack(stack, where);
  detail::check_diagnosis_options(options, where);
  if (batch < 2) {
    detail::reject_argument<std::invalid_argument>(
        where, "batch", std::to_string(batch), "at least 2 samples (one sample cannot tell a dead unit from a quiet one)");
  }
  Eigen::MatrixXd x(detail::eigen_index(stack.input_units()), detail::eigen_index(batch));
  fill(view_of(x), dist::normal{0.0, std::sqrt(stack.input_second_moment())}, s.named("input"));
  Eigen::MatrixXd g(detail::eigen_index(stack.top_width()), detail::eigen_index(batch));
  fill(view_of(g), dist::normal{0.0, 1.0}, s.named("output_gradient"));
  return diagnose_pass(stack, net, x, g, options, std::forward<Exec>(exec));
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_DIAGNOSE_HPP
