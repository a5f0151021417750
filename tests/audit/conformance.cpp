// Tests of audit/conformance.hpp: power against the mistakes it is for (wrong fans,
// wrong shape), size over many seeds, non-finite values and bad input. The expected
// variances are the published formulas (REFERENCES.md: Glorot & Bengio 2010 eq. 12/16,
// He et al. 2015); fixed seeds keep every verdict deterministic, and each test states
// its false-alarm rate over random seeds.
#include "kindling/audit/conformance.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/schemes/fixed.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {

template <class Scheme>
std::vector<float> made_by(const dense& layer, const Scheme& scheme, std::uint64_t seed) {
  const auto s = layer.weight_shape();
  std::vector<float> w(s[0] * s[1]);
  initialize(strided_view<float>(w.data(), shape(s[0], s[1])), layer, scheme, make_stream(seed, "pump.encoder.weight"));
  return w;
}

strided_view<const float> view_of(const std::vector<float>& w, const dense& layer) {
  const auto s = layer.weight_shape();
  return strided_view<const float>(w.data(), shape(s[0], s[1]));
}

}  // namespace

TEST_CASE("a tensor made by a scheme conforms to that scheme") {
  // False-alarm rate over random seeds: at most alpha = 0.001 (Bonferroni over 3 checks).
  const dense layer(512, 128);
  SUBCASE("He normal") {
    const auto w = made_by(layer, he_normal{}, 1);
    const audit_report r = check_scheme(view_of(w, layer), layer, he_normal{});
    CHECK_MESSAGE(r, r.explain());
    CHECK(r.findings().size() == 5);  // finite, bounds, ks, mean, variance
    CHECK(mentions(r.explain(), "He normal with fan-in 512: all 5 checks passed"));
  }
  SUBCASE("Glorot uniform") {
    const auto w = made_by(layer, glorot_uniform{}, 2);
    const audit_report r = check_scheme(view_of(w, layer), layer, glorot_uniform{});
    CHECK_MESSAGE(r, r.explain());
  }
  SUBCASE("a truncated normal rule") {
    const fan_scaled rule{1, fan_basis::out, draw_shape::truncated_normal, 2};
    const auto w = made_by(layer, rule, 3);
    CHECK_MESSAGE(check_scheme(view_of(w, layer), layer, rule), check_scheme(view_of(w, layer), layer, rule).explain());
  }
  SUBCASE("a fixed uniform, checked as a distribution") {
    const auto w = made_by(layer, fixed_uniform{-0.5, 2.0}, 4);
    const audit_report r = check_distribution(view_of(w, layer), dist::uniform{-0.5, 2.0});
    CHECK_MESSAGE(r, r.explain());
  }
  SUBCASE("float16 values of a normal") {
    std::vector<float16> h(128 * 512);
    const strided_view<float16> v(h.data(), shape(128, 512));
    initialize(v, layer, lecun_normal{}, make_stream(5, "x"));
    CHECK_MESSAGE(check_scheme(v, layer, lecun_normal{}), check_scheme(v, layer, lecun_normal{}).explain());
  }
}

TEST_CASE("a fan-in off by a factor of two fails and the message names the fan that fits") {
  // He normal for fan-in 1024, claimed for fan-in 2048: sd ratio √2 (0.0442 against
  // sqrt(2/2048) = 0.03125, printed 0.0312 and 1.42x at three digits) over 65536 values,
  // about 180 standard errors, so the miss rate over random seeds is 0 to any precision.
  const dense made(1024, 64), claimed(2048, 32);
  const auto w = made_by(made, he_normal{}, 11);
  const strided_view<const float> v(w.data(), shape(32, 2048));
  const audit_report r = check_scheme(v, claimed, he_normal{});
  CHECK_FALSE(r);
  REQUIRE(r.find("variance") != nullptr);
  CHECK_FALSE(r.find("variance")->passed);
  const std::string why = r.find("variance")->sentence;
  CHECK_MESSAGE(mentions(why, "is 1.42x the 0.0312 expected for He normal with fan-in 2048"), why);
  CHECK_MESSAGE(mentions(why, "the value matches fan-in 1024 (1/2 times the declared)"), why);
  MESSAGE(r.explain());
}

TEST_CASE("a fan-out used for a fan-in is named as this layer's fan-out") {
  const dense layer(300, 100);
  const auto w = made_by(layer, he_normal(0, fan_basis::out), 12);
  const audit_report r = check_scheme(view_of(w, layer), layer, he_normal{});
  CHECK_FALSE(r);
  CHECK_MESSAGE(mentions(r.explain(), "matches fan-out 100 of this layer"), r.explain());
}

TEST_CASE("power: Glorot passes as Glorot and fails as He, and a normal is told from a uniform") {
  // 10^4 values or more, 20 seeds each: every one must be caught. The He variance is
  // 2/fan_in against Glorot's 2/(fan_in + fan_out), so with fan_out = fan_in / 4 the
  // sd ratio is 1.12, about 14 standard errors at n = 16384: the miss rate per seed is
  // below 1e-20. A normal against a uniform of the same variance: KS D ≈ 0.03 against
  // a critical value ≈ 0.016 at alpha/3, miss rate per seed below 1e-6.
  const dense layer(256, 64);
  int glorot_ok = 0, he_rejected = 0, shape_rejected = 0;
  for (std::uint64_t seed = 100; seed < 120; ++seed) {
    const auto w = made_by(layer, glorot_uniform{}, seed);
    glorot_ok += check_scheme(view_of(w, layer), layer, glorot_uniform{}) ? 1 : 0;
    he_rejected += check_scheme(view_of(w, layer), layer, he_uniform{}) ? 0 : 1;
    const auto n = made_by(layer, glorot_normal{}, seed);
    const audit_report r = check_scheme(view_of(n, layer), layer, glorot_uniform{});
    shape_rejected += (!r.find("ks")->passed) ? 1 : 0;
  }
  CHECK(glorot_ok == 20);  // false alarms: binomial(20, <= 0.001); P(any) <= 0.02
  CHECK(he_rejected == 20);
  CHECK(shape_rejected == 20);
  SUBCASE("the failing KS sentence names the shape through the kurtosis") {
    const auto n = made_by(layer, glorot_normal{}, 7);
    const audit_report r = check_scheme(view_of(n, layer), layer, glorot_uniform{});
    CHECK_MESSAGE(mentions(r.find("ks")->sentence, "the values do not follow Glorot uniform"), r.explain());
    CHECK_MESSAGE(mentions(r.find("ks")->sentence, "against the 1.8 of the declared shape"), r.explain());
  }
}

TEST_CASE("size: a correct tensor fails at about the nominal rate over many seeds") {
  // 200 seeds at alpha = 0.01: failures ~ Binomial(200, <= 0.01), mean <= 2.
  // P(X >= 8) = 0.0011 for p = 0.01, so "fewer than 8" fails on a correct check about
  // once in a thousand random seed ranges. The other direction: KS p-values of a
  // correct tensor are uniform, so the count below 0.1 is Binomial(200, 0.1) (mean 20,
  // sd 4.2); [8, 34] holds with probability 0.996 and fails if the p-values are
  // systematically too large (an over-conservative test) or too small.
  const dense layer(40, 25);  // 1000 values, exact KS
  int failures = 0, ks_below_tenth = 0;
  const audit_options at_01{0.01, weight_layout::out_in};
  for (std::uint64_t seed = 0; seed < 200; ++seed) {
    const auto w = made_by(layer, he_normal{}, 5000 + seed);
    const audit_report r = check_scheme(view_of(w, layer), layer, he_normal{}, at_01);
    failures += r ? 0 : 1;
    ks_below_tenth += r.find("ks")->p_value < 0.1 ? 1 : 0;
  }
  MESSAGE("failures " << failures << " of 200; KS p < 0.1 in " << ks_below_tenth);
  CHECK(failures < 8);
  CHECK(ks_below_tenth >= 8);
  CHECK(ks_below_tenth <= 34);
}

TEST_CASE("values outside the declared bounds fail the bound check with the farthest one") {
  std::vector<double> w(1000);
  fill(strided_view<double>(w.data(), shape(10, 100)), dist::symmetric_uniform{1.0}, make_stream(3, "b"));
  w[517] = 1.25;
  const audit_report r = check_distribution(strided_view<const double>(w.data(), shape(10, 100)),
                                            dist::symmetric_uniform{1.0});
  CHECK_FALSE(r.find("bounds")->passed);
  CHECK_MESSAGE(mentions(r.find("bounds")->sentence, "1 of 1000 values lie outside (-1, 1)"), r.explain());
  CHECK_MESSAGE(mentions(r.find("bounds")->sentence, "the farthest is 1.25 (unit 5, connection 17)"), r.explain());
}

TEST_CASE("non-finite values are reported as such and never counted") {
  std::vector<float> w(64 * 64, 0.01f);
  fill(strided_view<float>(w.data(), shape(64, 64)), dist::normal{0, 0.1}, make_stream(1, "n"));
  w[70] = std::numeric_limits<float>::quiet_NaN();
  w[71] = std::numeric_limits<float>::infinity();
  const audit_report r = check_distribution(strided_view<const float>(w.data(), shape(64, 64)), dist::normal{0, 0.1});
  CHECK_FALSE(r);
  CHECK(r.findings().size() == 1);
  CHECK_MESSAGE(mentions(r.explain(), "2 of 4096 values are not finite (1 NaN, 1 infinite; the first, NaN, at flat index 70 (unit 1, connection 6))"),
                r.explain());
}

TEST_CASE("a region of a tensor can be checked on its own") {
  std::vector<float> w(200 * 100);
  const strided_view<float> whole(w.data(), shape(200, 100));
  initialize(whole, dense(100, 200), he_uniform{}, make_stream(8, "r"));
  const strided_view<float> half = whole.sub(region(shape(100, 0), shape(100, 100)));
  CHECK(check_scheme(half, dense(100, 200), he_uniform{}));
  CHECK_FALSE(check_scheme(half, dense(100, 200), he_normal{}));
}

TEST_CASE("bad input to the conformance checks is refused before anything is read") {
  std::vector<float> w(8 * 4, 0.1f);
  const strided_view<const float> v(w.data(), shape(8, 4));
  SUBCASE("alpha outside (0, 1)") {
    audit_options o;
    o.alpha = 0;
    CHECK(mentions(message_of<std::domain_error>([&] { (void)check_distribution(v, dist::normal{0, 1}, o); }),
                   "argument 'alpha' = 0, expected a significance level in (0, 1)"));
    o.alpha = 1.5;
    CHECK(mentions(message_of<std::domain_error>([&] { (void)check_scheme(v, dense(4, 8), he_normal{}, o); }),
                   "'alpha' = 1.5"));
  }
  SUBCASE("a shape that is not the layer's") {
    CHECK(!message_of<std::invalid_argument>([&] { (void)check_scheme(v, dense(5, 8), he_normal{}); }).empty());
  }
  SUBCASE("an invalid declared distribution") {
    CHECK(!message_of<std::domain_error>([&] { (void)check_distribution(v, dist::normal{0, -1}); }).empty());
    // A symmetric uniform is checked as a uniform, but the error names its own field.
    const std::string bound = message_of<std::domain_error>([&] { (void)check_distribution(v, dist::symmetric_uniform{-1}); });
    CHECK_MESSAGE(mentions(bound, "symmetric_uniform"), bound);
    CHECK_MESSAGE(mentions(bound, "bound"), bound);
  }
}

namespace {

// A tensor of element type E drawn from d, as a view.
template <class E, class D>
strided_view<const E> drawn(std::vector<E>& storage, std::uint64_t rows, std::uint64_t cols, const D& d,
                            std::uint64_t seed) {
  storage.resize(rows * cols);
  fill(strided_view<E>(storage.data(), shape(rows, cols)), d, make_stream(seed, "heat.exchanger.weight"));
  return strided_view<const E>(storage.data(), shape(rows, cols));
}

// The power cases of the audit-trust issue, in one element type, at 10^4 values.
// He normal's variance is 2 / fan-in (He et al., ICCV 2015, eq. 10).
template <class E>
void power_in(const char* type) {
  std::vector<E> w;
  const dense layer(100, 100);
  const double he_sd = std::sqrt(2.0 / 100);
  for (std::uint64_t seed = 1; seed <= 10; ++seed) {
    // A fan wrong by 2 either way: the sd is off by sqrt(2), some 50 standard errors.
    for (double factor : {2.0, 0.5}) {
      const audit_report r =
          check_scheme(drawn<E>(w, 100, 100, dist::normal{0, he_sd / std::sqrt(factor)}, seed), layer, he_normal{});
      CHECK_MESSAGE(!r.find("variance")->passed, type << " fan x" << factor << ": " << r.explain());
      // The mean is right: its check must not take the blame for the scale.
      CHECK_MESSAGE(r.find("mean")->passed, type << " fan x" << factor << ": " << r.explain());
    }
    // A uniform with the declared normal's mean and variance: only its shape is wrong.
    const double b = he_sd * std::sqrt(3.0);
    const audit_report u = check_scheme(drawn<E>(w, 100, 100, dist::uniform{-b, b}, seed), layer, he_normal{});
    CHECK_MESSAGE(!u.find("ks")->passed, type << " uniform declared normal: " << u.explain());
  }
}

}  // namespace

TEST_CASE("power in every element type: a fan off by 2 and a uniform declared normal fail at 10^4 values") {
  // Miss rates over random seeds: a fan off by 2 moves the sd by 41%, about 50 standard
  // errors of the sample sd at n = 10^4, so below 1e-100; a uniform against a normal of
  // the same variance has D about 0.03 against a critical 0.02 at alpha/3, below 1e-4.
  power_in<float>("f32");
  power_in<double>("f64");
  power_in<float16>("f16");
  power_in<bfloat16>("bf16");
}

TEST_CASE("a pure scale error fails the variance check and never the mean check") {
  // The case: fan-in 32 used where 96 is right. The mean check uses the larger
  // of the sample's and the declared sd, so its false-alarm rate is still <= alpha / 3
  // when the sd is wrong; over 100 seeds at alpha = 0.01 that is <= 0.33 expected.
  std::vector<float> w;
  const dense layer(96, 64);
  int mean_failures = 0, variance_failures = 0;
  const audit_options at_01{0.01, weight_layout::out_in};
  for (std::uint64_t seed = 1; seed <= 100; ++seed) {
    const audit_report r =
        check_scheme(drawn<float>(w, 64, 96, dist::normal{0, std::sqrt(2.0 / 32)}, seed), layer, he_normal{}, at_01);
    mean_failures += r.find("mean")->passed ? 0 : 1;
    variance_failures += r.find("variance")->passed ? 0 : 1;
  }
  CHECK(variance_failures == 100);
  CHECK(mean_failures <= 2);  // P(X >= 3 | 100, 0.0033) = 0.004
}

TEST_CASE("the verdict is the same bit for bit on every executor") {
  std::vector<bfloat16> w;
  const auto v = drawn<bfloat16>(w, 300, 700, dist::normal{0, 0.05}, 4);  // 4 chunks and a part
  const audit_report serial = check_distribution(v, dist::normal{0, 0.05});
  const audit_report threads = check_distribution(v, dist::normal{0, 0.05}, {}, "", thread_executor(3));
  REQUIRE(serial.findings().size() == threads.findings().size());
  for (std::size_t i = 0; i < serial.findings().size(); ++i) {
    const audit_finding &a = serial.findings()[i], &b = threads.findings()[i];
    CHECK(a.sentence == b.sentence);
    CHECK((a.statistic == b.statistic || (std::isnan(a.statistic) && std::isnan(b.statistic))));
  }
}

TEST_CASE("each statistical finding carries the interval it accepted") {
  std::vector<float> w;
  const audit_report r = check_distribution(drawn<float>(w, 64, 64, dist::normal{0.5, 2}, 8), dist::normal{0.5, 2});
  CHECK_MESSAGE(r, r.explain());
  const audit_finding* ks = r.find("ks");
  CHECK(ks->lower == 0);
  CHECK(ks->statistic <= ks->upper);
  const audit_finding* mean = r.find("mean");
  CHECK(mean->lower < 0.5);
  CHECK(mean->upper > 0.5);
  const audit_finding* sd = r.find("variance");
  CHECK(sd->lower < 2);
  CHECK(sd->upper > 2);
  CHECK(std::isnan(r.find("bounds")->p_value));
}

TEST_CASE("an interval of a level below 100% is never printed as 100%") {
  std::vector<float> w;
  audit_options o;
  o.alpha = 1e-4;  // each of the three checks at alpha / 3: a 99.997% interval
  // A mean 1.5 away from the declared one, so the finding states its interval.
  const audit_report r =
      check_distribution(drawn<float>(w, 64, 64, dist::normal{2, 2}, 8), dist::normal{0.5, 2}, o);
  CHECK_MESSAGE(!r, r.explain());
  const std::string mean = r.find("mean")->sentence;
  CHECK_MESSAGE(mentions(mean, "99.997% interval"), mean);
  CHECK_MESSAGE(!mentions(mean, "(100%"), mean);
}

TEST_CASE("float and float16 verdicts are the same bit for bit on every executor") {
  std::vector<float> w;
  const auto v = drawn<float>(w, 300, 700, dist::normal{0.01, 0.05}, 5);  // 4 chunks and a part
  std::vector<float16> h;
  const auto vh = drawn<float16>(h, 300, 700, dist::symmetric_uniform{0.2}, 6);
  const audit_report pairs[2][2] = {
      {check_distribution(v, dist::normal{0.01, 0.05}),
       check_distribution(v, dist::normal{0.01, 0.05}, {}, "", thread_executor(3))},
      {check_distribution(vh, dist::symmetric_uniform{0.2}),
       check_distribution(vh, dist::symmetric_uniform{0.2}, {}, "", thread_executor(2))}};
  for (const auto& pair : pairs) {
    CHECK_MESSAGE(pair[0].passed(), pair[0].explain());
    REQUIRE(pair[0].findings().size() == pair[1].findings().size());
    for (std::size_t i = 0; i < pair[0].findings().size(); ++i) {
      CHECK(pair[0].findings()[i].sentence == pair[1].findings()[i].sentence);
      const double a = pair[0].findings()[i].statistic, b = pair[1].findings()[i].statistic;
      CHECK((a == b || (std::isnan(a) && std::isnan(b))));
    }
  }
}
