// A tiny trainer of our own: classify the operating regime of a centrifugal pump --
// healthy, imbalance, cavitation -- from six vibration features, with a small tanh MLP
// trained by plain SGD.  The same network is started three ways: all-zero weights,
// constant weights and Glorot uniform.  The loss curves show that only the random start
// learns; kindling's pass diagnostics (propagate/diagnose.hpp) say why the other two
// cannot: the zero start sits on a saddle (every weight gradient is zero), the constant
// start never breaks the symmetry between hidden units (each layer acts as one unit).
//
// The data are simulated here from a fixed kindling stream (a demo scenario, invented):
//   x0, x1  in-phase and quadrature parts of the 1x (running speed) vibration phasor:
//           small when healthy or cavitating, radius ~2.5 at any phase with imbalance,
//   x2      broadband high-frequency energy (standardized): high with cavitation,
//   x3..x5  suction pressure, bearing temperature, flow: noise for this task.
// Imbalance is a ring around the healthy cluster, so one hidden unit (a single
// projection of the inputs) cannot separate it: a net whose units stay identical fails.
//
// Exit status 0 when the result is the expected one (the Glorot loss ends well below the
// other two; the diagnostics fire for zero and constant starts and not for Glorot).
#include <cmath>
#include <cstdio>
#include <string>
#include <utility>
#include <vector>

#include <kindling/propagate/diagnose.hpp>
#include <kindling/schemes/constant.hpp>
#include <kindling/schemes/fan_scaled.hpp>

using namespace kindling;

namespace {

constexpr Eigen::Index features = 6, classes = 3, samples = 240, batch = 24;
constexpr int epochs = 60;
constexpr double learning_rate = 0.3;

struct dataset {
  Eigen::MatrixXd x;                 // features x samples
  std::vector<Eigen::Index> label;   // 0 healthy, 1 imbalance, 2 cavitation
};

dataset simulate_pump(const stream& s) {
  dataset d;
  d.x.resize(features, samples);
  Eigen::MatrixXd noise(features, samples), phase(1, samples);
  fill(view_of(noise), dist::normal{0.0, 1.0}, s.named("noise"));
  fill(view_of(phase), dist::uniform{0.0, 1.0}, s.named("phase"));
  for (Eigen::Index i = 0; i < samples; ++i) {
    const Eigen::Index regime = i % classes;  // interleaved, so every batch has all three
    d.label.push_back(regime);
    d.x.col(i) = noise.col(i);
    d.x(0, i) *= 0.4;
    d.x(1, i) *= 0.4;
    d.x(2, i) *= 0.4;
    if (regime == 1) {
      const double angle = 2.0 * 3.141592653589793 * phase(0, i);
      d.x(0, i) += 2.5 * std::cos(angle);
      d.x(1, i) += 2.5 * std::sin(angle);
    }
    if (regime == 2) d.x(2, i) += 2.0;
  }
  return d;
}

// Mean cross-entropy of softmax(logits) and, into `gradient`, its derivative by the logits.
double cross_entropy(const Eigen::MatrixXd& logits, const std::vector<Eigen::Index>& label, Eigen::Index first,
                     Eigen::MatrixXd* gradient) {
  const Eigen::Index n = logits.cols();
  double loss = 0;
  gradient->resize(logits.rows(), n);
  for (Eigen::Index b = 0; b < n; ++b) {
    const Eigen::VectorXd z = logits.col(b).array() - logits.col(b).maxCoeff();
    const Eigen::VectorXd p = z.array().exp() / z.array().exp().sum();
    const Eigen::Index y = label[static_cast<std::size_t>(first + b)];
    loss -= std::log(p(y));
    gradient->col(b) = p;
    (*gradient)(y, b) -= 1.0;
  }
  *gradient /= static_cast<double>(n);
  return loss / static_cast<double>(n);
}

Eigen::MatrixXd output_of(const nonlinearity& phi, const Eigen::MatrixXd& pre) {
  return pre.unaryExpr([&phi](double v) { return phi(v); });
}

struct run_result {
  std::vector<double> losses;  // per epoch, on the whole training set
  audit_report at_start, at_end;
};

// Loss on all samples and the pass (with the loss gradient) that the diagnostics read.
double evaluate(const layer_stack& net_shape, const realized_stack& net, const dataset& d, pass_record* record) {
  const Eigen::MatrixXd none = Eigen::MatrixXd::Zero(classes, samples);
  const pass_record forward = run_pass(net_shape, net, d.x, none);
  Eigen::MatrixXd g;
  const double loss = cross_entropy(forward.pre.back(), d.label, 0, &g);
  if (record != nullptr) *record = run_pass(net_shape, net, d.x, g);
  return loss;
}

template <class Scheme>
run_result train(const layer_stack& net_shape, const Scheme& scheme, const dataset& d, const stream& model) {
  realized_stack net;
  for (const stack_layer& l : net_shape.layers()) {
    Eigen::MatrixXd w(static_cast<Eigen::Index>(l.width), static_cast<Eigen::Index>(l.in_width));
    initialize(view_of(w), dense(l.in_width, l.width), scheme, model.named(l.label + ".weight"));
    net.weights.push_back(w);
    net.biases.push_back(Eigen::VectorXd::Zero(static_cast<Eigen::Index>(l.width)));  // biases start at zero
  }
  run_result r;
  pass_record record;
  r.losses.push_back(evaluate(net_shape, net, d, &record));
  r.at_start = diagnose_pass(net_shape, net, d.x, record);
  const std::size_t depth = net_shape.depth();
  for (int epoch = 0; epoch < epochs; ++epoch) {
    for (Eigen::Index first = 0; first < samples; first += batch) {
      const Eigen::MatrixXd x = d.x.middleCols(first, batch);
      const pass_record forward = run_pass(net_shape, net, x, Eigen::MatrixXd::Zero(classes, batch));
      Eigen::MatrixXd g;
      cross_entropy(forward.pre.back(), d.label, first, &g);
      const pass_record back = run_pass(net_shape, net, x, g);
      for (std::size_t l = 0; l < depth; ++l) {
        const Eigen::MatrixXd a = l == 0 ? x : output_of(net_shape[l - 1].act, forward.pre[l - 1]);
        net.weights[l] -= learning_rate * back.grad[l] * a.transpose();
        net.biases[l] -= learning_rate * back.grad[l].rowwise().sum();
      }
    }
    r.losses.push_back(evaluate(net_shape, net, d, &record));
  }
  r.at_end = diagnose_pass(net_shape, net, d.x, record);
  return r;
}

void print_run(const char* name, const run_result& r) {
  std::printf("%-16s loss:", name);
  for (std::size_t e = 0; e < r.losses.size(); e += 10) std::printf(" %.3f", r.losses[e]);
  std::printf("  (epochs 0, 10, ..., %d)\n", epochs);
  for (const auto& [when, report] : {std::pair<const char*, const audit_report*>{"at the start", &r.at_start},
                                      {"after training", &r.at_end}}) {
    std::string text = report->explain();
    for (std::size_t at = text.find('\n'); at != std::string::npos; at = text.find('\n', at + 1)) {
      text.insert(at + 1, "    ");
    }
    std::printf("  %s:\n    %s\n", when, text.c_str());
  }
}

}  // namespace

int main() {
  const dataset d = simulate_pump(make_stream(2026, "pump.vibration"));
  layer_stack net_shape(features);  // the trainer's architecture; weights come from each start
  net_shape.add_dense(16, activation::tanh(), glorot_uniform{}, 0.0, "hidden1")
      .add_dense(16, activation::tanh(), glorot_uniform{}, 0.0, "hidden2")
      .add_dense(classes, activation::identity(), glorot_uniform{}, 0.0, "regime");
  const stream model = make_stream(20261202, "pump_regimes");

  const run_result zero = train(net_shape, zeros{}, d, model);
  const run_result same = train(net_shape, constant{0.2}, d, model);
  const run_result glorot = train(net_shape, glorot_uniform{}, d, model);
  std::printf("pump regimes: %lld samples, 6 features, 3 classes; tanh MLP 6-16-16-3, SGD lr %.1f, batch %lld\n",
              static_cast<long long>(samples), learning_rate, static_cast<long long>(batch));
  print_run("zeros", zero);
  print_run("constant 0.2", same);
  print_run("glorot-uniform", glorot);

  // The qualitative result this example exists to show.
  bool ok = true;
  const auto expect = [&ok](bool cond, const char* what) {
    if (!cond) std::printf("UNEXPECTED: %s\n", what);
    ok = ok && cond;
  };
  const double best_bad = std::min(zero.losses.back(), same.losses.back());
  expect(glorot.losses.back() < 0.5 * best_bad, "the Glorot start ends at less than half the loss of the others");
  expect(glorot.losses.back() < 0.25 * glorot.losses.front(), "the Glorot loss falls to a quarter of its start");
  expect(std::fabs(zero.losses.back() - std::log(3.0)) < 0.02, "the zero start stays at the chance loss ln 3");
  for (const audit_report* r : {&zero.at_start, &zero.at_end}) {
    expect(!r->find("zero-weight-gradients")->passed, "zero start: every weight gradient is zero");
  }
  for (const audit_report* r : {&same.at_start, &same.at_end}) {
    expect(r->find("zero-weight-gradients")->passed, "constant start: gradients are not zero");
    expect(!r->find("identical-units")->passed, "constant start: hidden units identical");
  }
  expect(glorot.at_start.passed(), "Glorot start: every diagnostic passes");
  std::printf("%s\n", ok ? "as expected: only the random start breaks the symmetry and learns" : "FAILED");
  return ok ? 0 : 1;
}
