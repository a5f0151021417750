// Tests of propagate/diagnose.hpp: saddle and symmetry diagnostics from a pass.
// Sources: "biases start at zero; equal or zero weights leave hidden units identical;
// zero weights with tanh give zero weight gradients at the first step" (common
// practice, REFERENCES.md); Glorot & Bengio 2010 and He et al. 2015 for the random
// schemes that must pass.
#include "kindling/propagate/diagnose.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
layer_stack tanh_stack() {
  layer_stack s(8);
  s.add_dense(16, activation::tanh(), glorot_uniform{})
      .add_dense(16, activation::tanh(), glorot_uniform{})
      .add_dense(3, activation::identity(), glorot_uniform{});
  return s;
}
// A copy, so that a finding of a temporary report stays valid (ASan caught the reference).
audit_finding finding(const audit_report& r, const char* check) {
  const audit_finding* f = r.find(check);
  REQUIRE(f != nullptr);
  return *f;
}
}  // namespace

// Exact cases: zero and constant weights give exactly equal rows (up to the last bit
// of Eigen's products, which the relative tolerance 1e-9 absorbs); Glorot rows differ
// by O(1), so no seed can make them equal.
TEST_CASE("an all-zero tanh network is flagged as a saddle with zero weight gradients (common practice)") {
  const layer_stack s = tanh_stack();
  realized_stack net = realize(s, make_stream(1, "net"));
  for (auto& w : net.weights) w.setZero();
  const audit_report r = diagnose_initialization(s, net, 64, make_stream(1, "batch"));
  CAPTURE(r.explain());
  CHECK_FALSE(r.passed());
  const audit_finding& z = finding(r, "zero-weight-gradients");
  CHECK_FALSE(z.passed);
  CHECK(z.statistic == 3.0);
  CHECK(mentions(z.sentence, "saddle"));
  CHECK_FALSE(finding(r, "identical-units").passed);  // all units are zero: identical too
  CHECK(finding(r, "dead-units").passed);             // tanh'(0) = 1: not dead, not saturated
  CHECK(finding(r, "saturated-units").passed);
}

TEST_CASE("a constant-weight network is flagged as symmetric, its gradients are not zero (common practice)") {
  const layer_stack s = tanh_stack();
  realized_stack net = realize(s, make_stream(1, "net"));
  for (auto& w : net.weights) w.setConstant(0.1);
  const audit_report r = diagnose_initialization(s, net, 64, make_stream(1, "batch"));
  CAPTURE(r.explain());
  CHECK(finding(r, "zero-weight-gradients").passed);
  const audit_finding& same = finding(r, "identical-units");
  CHECK_FALSE(same.passed);
  CHECK(same.statistic == 32.0);  // both hidden layers, 16 units each
  CHECK(mentions(same.sentence, "layer 'layer1' all 16 units"));
  CHECK(mentions(same.sentence, "acts as one unit"));
  CHECK(mentions(r.explain(), "symmetry not broken"));

  SUBCASE("two planted equal units among random ones are found and named") {
    realized_stack g = realize(s, make_stream(2, "net"));
    g.weights[1].row(9) = g.weights[1].row(4);
    g.weights[2].col(9) = g.weights[2].col(4);  // same outgoing weights: same gradient
    const audit_report rg = diagnose_initialization(s, g, 64, make_stream(1, "batch"));
    const audit_finding& f = finding(rg, "identical-units");
    CHECK_FALSE(f.passed);
    CHECK(f.statistic == 2.0);
    CHECK(mentions(f.sentence, "units 4, 9"));
  }
  SUBCASE("equal incoming weights but different outgoing ones: gradients differ, not flagged") {
    realized_stack g = realize(s, make_stream(2, "net"));
    g.weights[1].row(9) = g.weights[1].row(4);
    CHECK(finding(diagnose_initialization(s, g, 64, make_stream(1, "batch")), "identical-units").passed);
  }
}

TEST_CASE("a Glorot tanh network passes every pass diagnostic (Glorot & Bengio 2010)") {
  const layer_stack s = tanh_stack();
  const realized_stack net = realize(s, make_stream(3, "net"));
  const audit_report r = diagnose_initialization(s, net, 128, make_stream(3, "batch"));
  CAPTURE(r.explain());
  CHECK(r.passed());
  CHECK(r.findings().size() == 4);
  CHECK(mentions(r.explain(), "all 4 checks passed"));

  SUBCASE("the pass-record overload gives the same report") {
    Eigen::MatrixXd x(8, 40), g(3, 40);
    fill(view_of(x), dist::normal{0.0, 1.0}, make_stream(3, "x"));
    fill(view_of(g), dist::normal{0.0, 1.0}, make_stream(3, "g"));
    const audit_report a = diagnose_pass(s, net, x, g);
    const audit_report b = diagnose_pass(s, net, x, run_pass(s, net, x, g));
    CHECK(a.explain() == b.explain());
  }
}

TEST_CASE("a dense stack on a flattened feature map is diagnosed with channels x positions inputs") {
  layer_stack s = layer_stack::feature_maps(2, {4, 3});  // 24 inputs a sample
  s.add_dense(16, activation::tanh(), glorot_normal{}).add_dense(3, activation::identity(), glorot_normal{});
  CHECK(s[0].fans.fan_in == 24);
  const realized_stack net = realize(s, make_stream(4, "net"));
  const audit_report r = diagnose_initialization(s, net, 64, make_stream(4, "batch"));
  CAPTURE(r.explain());
  CHECK(r.passed());
  Eigen::MatrixXd two_rows(2, 8), g(3, 8);
  two_rows.setOnes();
  g.setOnes();
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_pass(s, net, two_rows, g); }),
                 "expected 24 rows"));
}

// He ReLU, width 64, depth 3, batch 256: a unit of layer 1 is dead with probability
// 2^-256 (its pre-activations are symmetric and independent across samples); in the
// deeper layers the ReLU's positive mean gives each unit an offset of about 0.7 of its
// spread (arc-cosine kernel, Cho & Saul 2009; from memory), and dead on 256 samples
// needs an offset below -4.3 spreads: ~1e-5 a unit, ~1e-3 for the 128 units over random
// seeds.  The seed is fixed.
TEST_CASE("dead ReLU units for the whole batch are found, a He network has none (He et al. 2015)") {
  layer_stack s(32);
  s.add_dense(64, activation::relu(), he_normal{}).add_dense(64, activation::relu(), he_normal{})
      .add_dense(4, activation::identity(), he_normal{});
  realized_stack net = realize(s, make_stream(4, "net"));
  CHECK(finding(diagnose_initialization(s, net, 256, make_stream(4, "batch")), "dead-units").passed);

  net.biases[1](3) = -100.0;  // far below any pre-activation: dead on every sample
  net.biases[1](5) = -100.0;
  const audit_report r = diagnose_initialization(s, net, 256, make_stream(4, "batch"));
  const audit_finding& d = finding(r, "dead-units");
  CAPTURE(d.sentence);
  CHECK_FALSE(d.passed);
  CHECK(d.statistic == 2.0);
  CHECK(mentions(d.sentence, "layer 'layer2' (relu): 2 of 64 units"));
  CHECK(mentions(d.sentence, "units 3, 5"));
  CHECK(finding(r, "identical-units").passed);  // two dead units share a zero gradient, not a function

  SUBCASE("a whole layer dead stops the weight gradients below and above it") {
    net.biases[1].setConstant(-100.0);
    const audit_report all = diagnose_initialization(s, net, 256, make_stream(4, "batch"));
    CHECK_FALSE(finding(all, "zero-weight-gradients").passed);
    CHECK(finding(all, "dead-units").statistic == 64.0);
  }
}

// Saturation: tanh'(h) < 0.01 means |h| > 2.99; on 95% of a batch.  With standardized
// inputs and Glorot weights the pre-activations have variance <= ~1 and zero mean per
// unit, so a unit beyond 2.99 on 95% of the samples would need a spread ~48 times
// larger: false-alarm rate effectively 0.  Raw readings around 40 (a temperature in
// degrees C, not standardized) push every unit's pre-activation to +-40 |sum w|.
TEST_CASE("saturated tanh and sigmoid units are found when the inputs are not standardized") {
  const layer_stack s = tanh_stack();
  const realized_stack net = realize(s, make_stream(5, "net"));
  Eigen::MatrixXd x(8, 100), g(3, 100);
  fill(view_of(x), dist::normal{0.0, 1.0}, make_stream(5, "x"));
  fill(view_of(g), dist::normal{0.0, 1.0}, make_stream(5, "g"));
  CHECK(finding(diagnose_pass(s, net, x, g), "saturated-units").passed);
  const Eigen::MatrixXd raw = (x.array() + 40.0).matrix();
  const audit_finding& sat = finding(diagnose_pass(s, net, raw, g), "saturated-units");
  CAPTURE(sat.sentence);
  CHECK_FALSE(sat.passed);
  CHECK(sat.statistic >= 10.0);  // most of layer 1's 16 units: |40 sum w| > 3 unless sum w is tiny
  CHECK(mentions(sat.sentence, "layer 'layer1' (tanh)"));
  CHECK(mentions(sat.sentence, "standardize"));

  SUBCASE("sigmoid with a bias of standard deviation 20") {
    layer_stack sg(8, 1.0);
    sg.add_dense(32, activation::sigmoid(), glorot_normal{}, 400.0).add_dense(2, activation::identity(), glorot_normal{});
    const realized_stack n2 = realize(sg, make_stream(6, "net"));
    const audit_finding& f = finding(diagnose_initialization(sg, n2, 100, make_stream(6, "b")), "saturated-units");
    CHECK_FALSE(f.passed);  // sigmoid'(h) < 0.0025 for |h| > 6.0: about 76% of N(0, 400) biases
    CHECK(f.statistic >= 16.0);
    CHECK(mentions(f.sentence, "(sigmoid)"));
  }
}

TEST_CASE("the pass diagnostics refuse bad input with a message naming the argument") {
  const layer_stack s = tanh_stack();
  const realized_stack net = realize(s, make_stream(1, "net"));
  const stream st = make_stream(1, "b");
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_initialization(s, net, 1, st); }), "argument 'batch' = 1"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_initialization(layer_stack(4), realized_stack{}, 8, st); }),
                 "no layers"));
  {
    layer_stack conv(3);
    conv.add_convolution(convolution(3, 8, {3}), activation::relu(), he_normal{});
    CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_initialization(conv, realized_stack{}, 8, st); }),
                   "convolution"));
  }
  const auto with = [&](auto set) {
    diagnosis_options o;
    set(o);
    return message_of<std::domain_error>([&] { diagnose_initialization(s, net, 8, st, o); });
  };
  CHECK(mentions(with([](diagnosis_options& o) { o.zero_gradient = -1; }), "argument 'options.zero_gradient' = -1"));
  CHECK(mentions(with([](diagnosis_options& o) { o.identical = 1.0; }), "argument 'options.identical' = 1"));
  CHECK(mentions(with([](diagnosis_options& o) { o.saturation_slope = 0.0; }), "argument 'options.saturation_slope' = 0"));
  CHECK(mentions(with([](diagnosis_options& o) { o.saturated_fraction = std::nan(""); }), "options.saturated_fraction"));
  Eigen::MatrixXd x(8, 10), g(3, 10), wrong(7, 10);
  x.setOnes();
  g.setOnes();
  wrong.setOnes();
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_pass(s, net, wrong, g); }), "argument 'input'"));
  pass_record rec = run_pass(s, net, x, g);
  rec.grad.pop_back();
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_pass(s, net, x, rec); }),
                 "kindling::diagnose_pass: argument 'record' = 3 pre-activation and 2 gradient matrices, expected 3 of each"));
  rec = run_pass(s, net, x, g);
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_pass(s, net, x.leftCols(5), rec); }),
                 "kindling::diagnose_pass: argument 'record.pre[0]' = 16 x 10 (gradient 16 x 10), expected 16 x 5 for both"));
  realized_stack short_net = net;
  short_net.weights.pop_back();
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_pass(s, short_net, x, rec); }),
                 "kindling::diagnose_pass: argument 'net' = 2 weights, expected 3 (one per layer of the stack)"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { diagnose_pass(s, net, wrong, rec); }),
                 "kindling::diagnose_pass: argument 'input' = 7 x 10, expected 8 rows and at least one column"));
}
