// Tests of audit/conformance.hpp at scale: the false-alarm rate of check_scheme on
// correct draws, measured over many seeds in every element type (float, double,
// float16, bfloat16) and at sizes 10^3 to 10^6 and 4096 x 4096, and the power on the
// mistakes the check is for at the same sizes. The declared variances are the
// published ones (Glorot & Bengio, AISTATS 2010, eq. 16; He et al., ICCV 2015, eq. 10);
// the truncated normal's is the standard truncated-normal formula (REFERENCES.md).
//
// The test names start with "rate:" so that the sanitizer presets, which run every
// other test, can leave these long measurements out (CMakePresets.json).
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstdio>
#include <string>
#include <vector>

#include "kindling/audit/conformance.hpp"
#include "kindling/schemes/fixed.hpp"

using namespace kindling;

namespace {

// A scheme of each draw shape the issue names: uniform, normal, truncated normal.
struct named_scheme {
  const char* name;
  fan_scaled rule;
};
const named_scheme schemes[] = {
    {"glorot-uniform", glorot_uniform{}.rule()},
    {"he-normal", he_normal{}.rule()},
    {"truncated-normal (2/fan-in, cut 2)", fan_scaled{2.0, fan_basis::in, draw_shape::truncated_normal, 2.0}},
};

struct tally {
  int trials = 0, at_0001 = 0, at_001 = 0, at_005 = 0;
  int ks = 0, mean = 0, variance = 0;  // each check below 0.01 / 3 on its own
  void add(const audit_report& r) {
    ++trials;
    ks += r.find("ks")->p_value < 0.01 / 3 ? 1 : 0;
    mean += r.find("mean")->p_value < 0.01 / 3 ? 1 : 0;
    variance += r.find("variance")->p_value < 0.01 / 3 ? 1 : 0;
    // The report was made at alpha 0.05; the family fails at a smaller alpha when a
    // check's p-value is below alpha / 3 or a non-statistical check failed.
    bool hard = false;
    double smallest_p = 1;
    for (const audit_finding& f : r.findings()) {
      if (std::isnan(f.p_value)) {
        hard = hard || !f.passed;
      } else {
        smallest_p = std::min(smallest_p, f.p_value);
      }
    }
    at_0001 += (hard || smallest_p < 0.001 / 3) ? 1 : 0;
    at_001 += (hard || smallest_p < 0.01 / 3) ? 1 : 0;
    at_005 += (hard || smallest_p < 0.05 / 3) ? 1 : 0;
  }
};

// Every (type, size, scheme, seed) draws from its own stream, so the trials are
// independent (the same seed and name would give every size and scheme the same bits).
template <class E>
audit_report drawn_and_checked(std::uint64_t rows, std::uint64_t cols, const fan_scaled& rule, std::uint64_t seed,
                               std::vector<E>& storage, const std::string& name) {
  storage.resize(rows * cols);
  const strided_view<E> v(storage.data(), shape(rows, cols));
  const dense layer(cols, rows);
  initialize(v, layer, rule, make_stream(seed, name));
  audit_options o;
  o.alpha = 0.05;
  return check_scheme(strided_view<const E>(v), layer, rule, o);
}

template <class E>
void measure_rates(const char* type, tally* total) {
  struct size {
    std::uint64_t rows, cols;
  };
  const size sizes[] = {{25, 40}, {100, 100}, {250, 400}, {1000, 1000}};
  std::vector<E> storage;
  for (const size& s : sizes) {
    for (const named_scheme& scheme : schemes) {
      tally t;
      const std::string name = std::string("belt.") + type + "." + std::to_string(s.rows * s.cols) + "." + scheme.name;
      for (std::uint64_t seed = 1; seed <= 200; ++seed) {
        t.add(drawn_and_checked(s.rows, s.cols, scheme.rule, seed, storage, name));
      }
      MESSAGE(std::string(type) << " n = " << s.rows * s.cols << " " << std::string(scheme.name) << ": false alarms over " << t.trials
                   << " seeds: " << t.at_0001 << " at alpha 0.001, " << t.at_001 << " at 0.01, " << t.at_005
                   << " at 0.05; at 0.01 / 3 each: ks " << t.ks << ", mean " << t.mean << ", variance "
                   << t.variance);
      // One cell of 200 seeds: a count this high has probability below 0.002 when the
      // rate is alpha (binomial tails: P(X >= 3 | 200, 0.001) = 0.0011,
      // P(X >= 7 | 200, 0.01) = 0.0045 for 0.01, P(X >= 21 | 200, 0.05) = 0.0014).
      CHECK(t.at_0001 <= 2);
      CHECK(t.at_001 <= 6);
      CHECK(t.at_005 <= 20);
      total->trials += t.trials;
      total->at_0001 += t.at_0001;
      total->at_001 += t.at_001;
      total->at_005 += t.at_005;
      total->ks += t.ks;
      total->mean += t.mean;
      total->variance += t.variance;
    }
  }
}

void check_pooled(const tally& total) {
  const double n = total.trials;
  MESSAGE("all " << total.trials << " checks: observed false-alarm rates " << total.at_0001 / n << " at alpha 0.001, "
                 << total.at_001 / n << " at 0.01, " << total.at_005 / n << " at 0.05; each check at 0.01 / 3: ks "
                 << total.ks / n << ", mean " << total.mean / n << ", variance " << total.variance / n);
  // 2400 independent checks: a count above these has probability below 0.001 when the
  // rate is alpha (Poisson/binomial upper tails: P(X >= 9 | 2400, 0.001) = 0.0007,
  // P(X >= 41 | 2400, 0.01) = 0.0009, P(X >= 155 | 2400, 0.05) = 0.0009), so a check whose
  // real rate exceeds alpha is caught, while one at alpha passes.
  CHECK(total.at_0001 <= 8);
  CHECK(total.at_001 <= 40);
  CHECK(total.at_005 <= 154);
}

// The rates of one element type: each cell of measure_rates on its own, then pooled.
template <class E>
void check_rates(const char* type) {
  tally total;
  measure_rates<E>(type, &total);
  check_pooled(total);
}

}  // namespace

// Each element type is its own test case (ctest runs them side by side); the rates are
// recorded in tests/audit/RATES.md.
TEST_CASE("rate: correct f32 draws fail check_scheme at most at rate alpha (200 seeds a size and scheme)") {
  check_rates<float>("f32");
}
TEST_CASE("rate: correct f64 draws fail check_scheme at most at rate alpha (200 seeds a size and scheme)") {
  check_rates<double>("f64");
}
TEST_CASE("rate: correct f16 draws fail check_scheme at most at rate alpha (200 seeds a size and scheme)") {
  check_rates<float16>("f16");
}
TEST_CASE("rate: correct bf16 draws fail check_scheme at most at rate alpha (200 seeds a size and scheme)") {
  check_rates<bfloat16>("bf16");
}

namespace {
template <class E>
void check_large(const char* type) {
  std::vector<E> storage;
  for (const named_scheme& scheme : schemes) {
    for (std::uint64_t seed = 1; seed <= 5; ++seed) {
      storage.resize(4096 * 4096);
      const strided_view<E> v(storage.data(), shape(4096, 4096));
      const dense layer(4096, 4096);
      initialize(v, layer, scheme.rule, make_stream(seed, "conveyor.encoder.weight"));
      const audit_report r = check_scheme(strided_view<const E>(v), layer, scheme.rule);
      CHECK_MESSAGE(r, type << " " << scheme.name << " seed " << seed << ": " << r.explain());
    }
    // Power at the same size: drawn with a fan 1.1 times the declared one.
    const double sd = std::sqrt(scheme.rule.variance(fans{4096, 4096}) / 1.1);
    fill(strided_view<E>(storage.data(), shape(4096, 4096)), dist::normal{0.0, sd}, make_stream(9, "wrong.fan"));
    const audit_report wrong =
        check_scheme(strided_view<const E>(storage.data(), shape(4096, 4096)), dense(4096, 4096), scheme.rule);
    CHECK_MESSAGE(!wrong.find("variance")->passed, type << " " << scheme.name << ": " << wrong.explain());
  }
}
}  // namespace

TEST_CASE("rate: 4096 x 4096 correct draws pass in every element type (5 seeds) and a fan off by 1.1 fails") {
  check_large<float>("f32");
  check_large<double>("f64");
  check_large<float16>("f16");
  check_large<bfloat16>("bf16");
}
