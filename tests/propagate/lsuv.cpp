// Tests of propagate/lsuv.hpp: LSUV calibration (Mishkin & Matas, ICLR 2016: orthonormal
// start, then W <- W / sqrt(Var) until |Var - 1| <= 0.1, at most 10 rescalings; the two
// numbers from memory) through a forward pass the test writes itself, the way a user's
// own network would: kindling sees only weight views and callables.
#include "kindling/propagate/lsuv.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {

// The user's network: ReLU MLP, float weights, its own biases; not a kindling type.
struct user_mlp {
  std::vector<Eigen::MatrixXf> w;
  std::vector<Eigen::VectorXf> b;

  explicit user_mlp(const std::vector<Eigen::Index>& widths) {
    for (std::size_t k = 0; k + 1 < widths.size(); ++k) {
      w.emplace_back(Eigen::MatrixXf::Zero(widths[k + 1], widths[k]));
      b.emplace_back(Eigen::VectorXf::Constant(widths[k + 1], 0.05f));
    }
  }
  // Pre-activation of layer k (0-based) on batch x (one column a sample).
  Eigen::MatrixXf pre(std::size_t k, const Eigen::MatrixXf& x) const {
    Eigen::MatrixXf a = x;
    for (std::size_t j = 0;; ++j) {
      Eigen::MatrixXf h = w[j] * a;
      h.colwise() += b[j];
      if (j == k) return h;
      a = h.cwiseMax(0.0f);
    }
  }
  std::vector<lsuv_layer<float>> calibration(const Eigen::MatrixXf& batch) {
    std::vector<lsuv_layer<float>> layers;
    for (std::size_t k = 0; k < w.size(); ++k) {
      const dense shape_of(static_cast<std::uint64_t>(w[k].cols()), static_cast<std::uint64_t>(w[k].rows()));
      layers.emplace_back("layer" + std::to_string(k), view_of(w[k]), shape_of,
                          [this, k, &batch] { return pre(k, batch); });
    }
    return layers;
  }
};

// Sensor-like inputs: 48 features with standard deviation 2 (not standardized).
Eigen::MatrixXf sensor_batch(Eigen::Index n, const char* name) {
  Eigen::MatrixXf x(48, n);
  fill(view_of(x), dist::normal{0.0, 2.0}, make_stream(2016, name));
  return x;
}

}  // namespace

// Sampling noise: each layer ends within ~1e-6 of variance 1 on the calibration batch
// (the bias here is the same for every unit, so the variance about the mean scales
// exactly with the weight: one rescaling hits 1), or inside the tolerance without any
// rescaling.  On a fresh batch of 512 the variance moves by its sampling error, about
// 2% relative here (per-sample mean squares of these layers vary by ~40%, /sqrt(512)),
// so leaving 1 +- 0.1 takes a 5-sigma deviation: false-alarm rate below 1e-6 over
// random seeds; the seed is fixed, so the test is deterministic.
TEST_CASE("after LSUV each layer's output variance is within the tolerance of 1 on a fresh batch (Mishkin & Matas 2016)") {
  user_mlp net({48, 128, 128, 96, 10});
  const Eigen::MatrixXf calibration = sensor_batch(512, "calibration");
  const lsuv_report r = lsuv_initialize(net.calibration(calibration), make_stream(7, "pump"));
  CAPTURE(r.table());
  REQUIRE(r.converged());
  CHECK(r.layers.size() == 4);
  int moved = 0;
  for (const auto& l : r.layers) {
    if (std::fabs(l.initial_variance() - 1.0) > 0.1) ++moved;
    CHECK(l.rescalings <= 10);
  }
  CHECK_MESSAGE(moved >= 3, "the orthonormal start leaves most layers away from variance 1 (else the test proves nothing)");
  const Eigen::MatrixXf fresh = sensor_batch(512, "fresh");
  for (std::size_t k = 0; k < net.w.size(); ++k) {
    CAPTURE(k);
    const double v = detail::entry_variance(net.pre(k, fresh));
    CHECK_MESSAGE(std::fabs(v - 1.0) <= 0.1, "variance on a fresh batch within 1 +- 0.1, got ", v);
  }
  CHECK(mentions(r.explain(), "all 4 layers"));
}

TEST_CASE("LSUV starts from the orthonormal weights of stream label.weight (Saxe et al. 2014, as the paper does)") {
  Eigen::MatrixXf w = Eigen::MatrixXf::Zero(32, 64);
  std::vector<lsuv_layer<float>> layers;
  layers.emplace_back("enc", view_of(w), dense(64, 32), [] { return 1.0; });  // already unit variance
  const lsuv_report r = lsuv_initialize(layers, make_stream(3, "model"));
  CHECK(r.converged());
  CHECK(r.layers[0].rescalings == 0);
  Eigen::MatrixXf expected(32, 64);
  initialize(view_of(expected), dense(64, 32), orthogonal{1.0}, make_stream(3, "model").named("enc.weight"));
  CHECK_MESSAGE(w == expected, "the weight is exactly orthogonal{1} drawn from stream 'enc.weight'");
  const Eigen::MatrixXf gram = w * w.transpose();
  CHECK_MESSAGE((gram - Eigen::MatrixXf::Identity(32, 32)).cwiseAbs().maxCoeff() < 1e-5f, "orthonormal rows");
}

TEST_CASE("lsuv_rescale calibrates weights the caller already drew, with a callable returning the variance") {
  Eigen::MatrixXd w(64, 64);
  initialize(view_of(w), dense(64, 64), he_normal{}, make_stream(5, "w"));
  Eigen::MatrixXd x(64, 256);
  fill(view_of(x), dist::normal{0.0, 1.0}, make_stream(5, "x"));
  std::vector<lsuv_layer<double>> layers;
  layers.emplace_back("only", view_of(w), dense(64, 64),
                      std::function<double()>([&] { return detail::entry_variance(w * x); }));
  const lsuv_report r = lsuv_rescale(layers);
  CHECK(r.converged());
  CHECK(r.layers[0].initial_variance() == doctest::Approx(2.0).epsilon(0.15));  // He: Var(Wx) = 2 for unit inputs
  CHECK(r.layers[0].rescalings == 1);
  CHECK(r.layers[0].factor == doctest::Approx(1.0 / std::sqrt(r.layers[0].initial_variance())));
  CHECK(detail::entry_variance(w * x) == doctest::Approx(1.0).epsilon(1e-9));
}

TEST_CASE("LSUV stops at the iteration cap with a report naming the layer when it cannot reach the tolerance") {
  Eigen::MatrixXf w1 = Eigen::MatrixXf::Zero(16, 16), w2 = Eigen::MatrixXf::Zero(16, 16);
  Eigen::MatrixXf fixed_output(16, 100);
  fill(view_of(fixed_output), dist::normal{0.0, 2.0}, make_stream(9, "fixed"));  // variance ~4, whatever w1 is
  Eigen::MatrixXf x(16, 100);
  fill(view_of(x), dist::normal{0.0, 1.0}, make_stream(9, "x"));

  SUBCASE("a callable that ignores the weight") {
    std::vector<lsuv_layer<float>> layers;
    layers.emplace_back("stuck", view_of(w1), dense(16, 16), [&] { return fixed_output; });
    layers.emplace_back("next", view_of(w2), dense(16, 16), [&] { return (2.0f * w2 * x).eval(); });
    lsuv_options o;
    o.max_iterations = 10;
    const lsuv_report r = lsuv_initialize(layers, make_stream(1, "m"), o);
    CHECK_FALSE(r.converged());
    CHECK_FALSE(static_cast<bool>(r));
    const lsuv_layer_result& stuck = *r.find("stuck");
    CHECK(stuck.rescalings == 10);
    CHECK(stuck.variances.size() == 11);
    CHECK_FALSE(stuck.converged);
    CHECK(r.find("next")->converged);  // the layers after it are still calibrated
    const std::string why = r.explain();
    CAPTURE(why);
    CHECK(mentions(why, "layer 'stuck'"));
    CHECK(mentions(why, "cap of 10"));
    CHECK(mentions(why, "did not respond"));
    CHECK_FALSE(mentions(why, "'next'"));
  }
  SUBCASE("a bias whose spread alone has variance 4") {
    Eigen::VectorXf bias(16);
    fill(view_of(bias), dist::normal{0.0, 2.0}, make_stream(9, "bias"));
    std::vector<lsuv_layer<float>> layers;
    layers.emplace_back("biased", view_of(w1), dense(16, 16), [&] {
      Eigen::MatrixXf h = w1 * x;
      h.colwise() += bias;
      return h;
    });
    lsuv_options o;
    o.max_iterations = 4;
    const lsuv_report r = lsuv_initialize(layers, make_stream(1, "m"), o);
    CHECK_FALSE(r.converged());
    CHECK(r.layers[0].rescalings == 4);
    CHECK(r.layers[0].final_variance() > 1.1);
    CHECK(mentions(r.explain(), "cap of 4"));
  }
  SUBCASE("a constant output: variance 0 is reported, not divided by") {
    std::vector<lsuv_layer<float>> layers;
    layers.emplace_back("flat", view_of(w1), dense(16, 16), [] { return Eigen::MatrixXf::Constant(4, 4, 3.0f); });
    const lsuv_report r = lsuv_initialize(layers, make_stream(1, "m"));
    CHECK_FALSE(r.converged());
    CHECK(r.layers[0].rescalings == 0);
    CHECK(mentions(r.explain(), "constant"));
    CHECK(w1.allFinite());
  }
}

TEST_CASE("LSUV refuses bad input before writing, and restores every weight when a callable fails") {
  Eigen::MatrixXf w = Eigen::MatrixXf::Constant(8, 8, 0.5f);
  const Eigen::MatrixXf before = w;
  const auto one = [] { return 1.0; };
  const stream s = make_stream(1, "m");
  const auto just = [&](lsuv_layer<float> l) { return std::vector<lsuv_layer<float>>{std::move(l)}; };

  CHECK(mentions(message_of<std::invalid_argument>([&] { lsuv_initialize(std::vector<lsuv_layer<float>>{}, s); }),
                 "kindling::lsuv_initialize: argument 'layers' = an empty list, expected at least one layer"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { lsuv_layer<float>("", view_of(w), dense(8, 8), one); }),
                 "kindling::lsuv_layer: argument 'label' = '', expected a layer name"));
  CHECK(mentions(message_of<std::invalid_argument>(
                     [&] { lsuv_layer<float>("a", view_of(w), dense(8, 8), std::function<double()>()); }),
                 "kindling::lsuv_layer: argument 'forward' = an empty function, expected a callable"));
  CHECK_THROWS_AS(lsuv_layer<float>("a", view_of(w), dense(8, 4), one), std::invalid_argument);  // weight is 8 x 8
  {
    std::vector<lsuv_layer<float>> twice;
    twice.emplace_back("a", view_of(w), dense(8, 8), one);
    twice.emplace_back("a", view_of(w), dense(8, 8), one);
    CHECK(mentions(message_of<std::invalid_argument>([&] { lsuv_initialize(twice, s); }), "'a' twice"));
  }
  for (double t : {0.0, 1.0, -0.1, std::nan("")}) {
    lsuv_options o;
    o.tolerance = t;
    const std::string m = message_of<std::domain_error>([&] { lsuv_initialize(just({"a", view_of(w), dense(8, 8), one}), s, o); });
    CHECK(mentions(m, "argument 'options.tolerance'"));
    CHECK(mentions(m, "(0, 1)"));
  }
  {
    lsuv_options o;
    o.max_iterations = 0;
    CHECK(mentions(message_of<std::invalid_argument>([&] { lsuv_rescale(just({"a", view_of(w), dense(8, 8), one}), o); }),
                   "argument 'options.max_iterations' = 0"));
  }
  CHECK(w == before);

  SUBCASE("a callable giving NaN") {
    const std::string m = message_of<std::domain_error>(
        [&] { lsuv_initialize(just({"a", view_of(w), dense(8, 8), [] { return std::nan(""); }}), s); });
    CHECK(mentions(m, "layer 'a'"));
    CHECK(mentions(m, "restored"));
  }
  SUBCASE("a callable that throws, after an earlier layer was rescaled") {
    Eigen::MatrixXf w0 = Eigen::MatrixXf::Constant(8, 8, 0.25f);
    const Eigen::MatrixXf before0 = w0;
    std::vector<lsuv_layer<float>> layers;
    layers.emplace_back("first", view_of(w0), dense(8, 8), [] { return 4.0; });
    layers.emplace_back("second", view_of(w), dense(8, 8), []() -> double { throw std::runtime_error("user's pass failed"); });
    CHECK_THROWS_AS(lsuv_initialize(layers, s), std::runtime_error);
    CHECK_MESSAGE(w0 == before0, "the rescaled and orthogonalized first layer is restored");
  }
  CHECK_MESSAGE(w == before, "a failed call leaves every weight as it was");
}
