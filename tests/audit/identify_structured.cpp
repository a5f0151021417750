// Tests of audit/identify.hpp for the structured schemes and the fitted gain and slope:
// tensors made by orthogonal, identity (dense and centre tap) and delta-orthogonal are
// named so, with their gain, for every element type; Gaussian matrices are not called
// orthogonal; Glorot tensors with a gain and He tensors with a leaky slope are named
// with the parameter (Glorot & Bengio 2010 with a gain; He et al. 2015,
// Var = 2 / ((1 + a^2) fan_in); REFERENCES.md).
#include "kindling/audit/identify.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/schemes/fixed.hpp"
#include "kindling/schemes/identity.hpp"
#include "kindling/schemes/orthogonal.hpp"

using namespace kindling;
using kindling_test::mentions;

namespace {
template <class E, class Layer, class Scheme>
identification identify_made(const shape& s, const Layer& layer, const Scheme& scheme, std::uint64_t seed) {
  std::vector<E> w(static_cast<std::size_t>(s.element_count()));
  const strided_view<E> v(w.data(), s);
  initialize(v, layer, scheme, make_stream(seed, "compressor.stage2.weight"));
  return identify_scheme(v, layer);
}
}  // namespace

TEST_CASE("orthogonal tensors are named orthogonal with their gain, in every element type") {
  const dense wide(512, 128);  // weight [128, 512]: orthonormal rows
  const dense tall(64, 256);   // weight [256, 64]: orthonormal columns
  SUBCASE("float") {
    const identification a = identify_made<float>(shape(128, 512), wide, orthogonal{1.5}, 1);
    CHECK(a.structure == "orthogonal, gain 1.5");
    CHECK(a.gain == doctest::Approx(1.5).epsilon(1e-6));
    CHECK(identify_made<float>(shape(256, 64), tall, orthogonal{}, 2).structure == "orthogonal, gain 1");
  }
  SUBCASE("double") {
    CHECK(identify_made<double>(shape(128, 512), wide, orthogonal{std::sqrt(2.0)}, 3).structure ==
          "orthogonal, gain 1.414");
  }
  SUBCASE("float16 and bfloat16, whose rounding the tolerance allows for") {
    CHECK(identify_made<float16>(shape(256, 64), tall, orthogonal{2.0}, 4).structure == "orthogonal, gain 2");
    const identification b = identify_made<bfloat16>(shape(128, 512), wide, orthogonal{0.5}, 5);
    CHECK(mentions(b.structure, "orthogonal, gain"));
    CHECK(b.gain == doctest::Approx(0.5).epsilon(0.01));  // bfloat16 keeps 8 bits
  }
  SUBCASE("a convolution kernel flattened to its unit matrix") {
    const convolution conv(16, 8, {3});  // weight [8, 16, 3]: unit matrix 8 x 48
    CHECK(identify_made<float>(shape(8, 16, 3), conv, orthogonal{}, 6).structure == "orthogonal, gain 1");
  }
}

TEST_CASE("identity tensors are named identity, dense and at the centre tap") {
  CHECK(identify_made<float>(shape(64, 64), dense(64, 64), identity{}, 1).structure == "identity, gain 1");
  CHECK(identify_made<double>(shape(32, 48), dense(48, 32), identity{0.5}, 1).structure == "identity, gain 0.5");
  const convolution conv(16, 16, {3, 3});
  const identification c = identify_made<float>(shape(16, 16, 3, 3), conv, identity{}, 1);
  CHECK(c.structure == "centre-tap identity, gain 1");
  CHECK(c.gain == 1.0);
  const convolution grouped(16, 16, {5}, 4);  // 4 groups: weight [16, 4, 5]
  CHECK(identify_made<float>(shape(16, 4, 5), grouped, identity{2}, 1).structure == "centre-tap identity, gain 2");
}

TEST_CASE("delta-orthogonal kernels are named so with their gain") {
  const convolution conv(32, 32, {3, 3});
  const identification d = identify_made<float>(shape(32, 32, 3, 3), conv, delta_orthogonal{std::sqrt(2.0)}, 7);
  CHECK(d.structure == "delta-orthogonal, gain 1.414");
  CHECK(d.gain == doctest::Approx(std::sqrt(2.0)).epsilon(1e-6));
  const convolution widening(16, 64, {3});  // out > in: orthonormal columns at the centre
  CHECK(identify_made<double>(shape(64, 16, 3), widening, delta_orthogonal{}, 8).structure ==
        "delta-orthogonal, gain 1");
  const convolution grouped(32, 32, {3}, 2);  // each group's 16 x 16 centre block orthogonal
  CHECK(identify_made<float>(shape(32, 16, 3), grouped, delta_orthogonal{}, 9).structure ==
        "delta-orthogonal, gain 1");
}

TEST_CASE("a Gaussian matrix is not called orthogonal") {
  // Its normalised off-diagonal Gram entries are about N(0, 1/m): for 128 x 512 each
  // has sd 0.044, far outside the float tolerance 2.4e-7, and the check claims the
  // structure only when an i.i.d. matrix passes with probability below 1e-9
  // (orthogonal_false_alarm; the bound erf(tol sqrt(m/2))^floor(n/2) of identify.hpp is
  // about 1e-340 here). So over random seeds the false-alarm rate is below 1e-9.
  const dense layer(512, 128);
  for (std::uint64_t seed : {1u, 2u, 3u}) {
    const identification g = identify_made<float>(shape(128, 512), layer, fixed_normal{0, 1.0 / std::sqrt(512.0)}, seed);
    CHECK(g.structure.empty());
    REQUIRE(g.best() != nullptr);
    CHECK(g.best()->name() == "LeCun normal");  // Var = 1/fan_in is LeCun's
  }
  SUBCASE("nor a bfloat16 one the check is too small to tell apart") {
    // 8 x 8192 in bfloat16: tol = 4 * 2^-8 = 0.0156, each entry has sd 1/sqrt(8192) = 0.011,
    // so an i.i.d. matrix would pass with probability about erf(1)^4 = 0.5: refused.
    const identification b = identify_made<bfloat16>(shape(8, 8192), dense(8192, 8), fixed_normal{0, 0.01}, 4);
    CHECK(b.structure.empty());
    CHECK(b.best() != nullptr);
  }
}

TEST_CASE("identification estimates the Glorot gain and the He leaky slope") {
  // 65536 values: the mean square has relative standard error 0.55% (normal) or 0.35%
  // (uniform), so the estimates below are within 4 standard errors of the truth except
  // with probability 6e-5 over random seeds (the seeds are fixed).
  const dense layer(512, 128);  // fan-in 512, fan-out 128, fan-average 320
  SUBCASE("Glorot uniform with the tanh gain 5/3") {
    const identification g = identify_made<float>(shape(128, 512), layer, glorot_uniform{5.0 / 3.0}, 11);
    REQUIRE(g.best() != nullptr);
    CAPTURE(g.best()->text());
    CHECK(g.best()->scheme == "Glorot uniform");
    CHECK(mentions(g.best()->name(), "Glorot uniform, gain 1.6"));
    CHECK(g.best()->parameter_value == doctest::Approx(5.0 / 3.0).epsilon(0.01));
    CHECK(mentions(g.best()->fan, "fan-average 320"));
    CHECK(g.best()->score > 1e-4);
  }
  SUBCASE("He normal with leaky slope 0.2") {
    const identification h = identify_made<float>(shape(128, 512), layer, he_normal{0.2}, 12);
    REQUIRE(h.best() != nullptr);
    CAPTURE(h.best()->text());
    CHECK(h.best()->scheme == "He normal");
    CHECK(mentions(h.best()->parameter, "slope"));
    CHECK(std::abs(h.best()->parameter_value - 0.2) < 0.06);  // 4 standard errors of the slope
    CHECK(mentions(h.best()->fan, "fan-in 512"));
    // The default He normal (slope 0) is rejected by the variance and ranks below.
    for (const scheme_candidate& c : h.ranking) {
      if (c.name() == "He normal" && mentions(c.fan, "fan-in")) CHECK(!c.variance_fits);
    }
  }
  SUBCASE("LeCun normal with gain sqrt(3): every candidate has a name the registry takes") {
    // Var = 3 / fan_in (s = 3 on fan-in, more than any He slope gives; no fixed rule has
    // it, the nearest being 3.2 / 512 on fan-average): the fan-in candidate is LeCun with
    // gain sqrt(3), as parse_scheme("lecun-normal(gain=1.732)") spells it.
    const identification l = identify_made<float>(shape(128, 512), layer, fixed_normal{0, std::sqrt(3 / 512.0)}, 14);
    bool lecun_found = false;
    for (const scheme_candidate& c : l.ranking) {
      CAPTURE(c.text());
      CHECK(!mentions(c.scheme, "variance scaling"));
      const bool registry_family = c.scheme.rfind("He ", 0) == 0 || c.scheme.rfind("Glorot ", 0) == 0 ||
                                   c.scheme.rfind("LeCun ", 0) == 0;
      CHECK(registry_family);
      if (c.name().rfind("LeCun normal, gain", 0) == 0 && c.variance_fits) {
        lecun_found = true;
        CHECK(std::abs(c.parameter_value - std::sqrt(3.0)) < 0.02);  // 4 standard errors of the gain
        CHECK(mentions(c.fan, "fan-in 512"));
      }
      // The fixed rule Var = 2 / fan_avg is Glorot with gain sqrt(2).
      if (c.rule.scale == 2 && c.rule.basis == fan_basis::average) CHECK(c.parameter == "gain 1.414");
      // The fixed rule Var = 1 / fan_out is He on fan-out with slope 1: 2 / ((1 + 1) fan_out).
      if (c.rule.scale == 1 && c.rule.basis == fan_basis::out) CHECK(c.parameter == "slope 1");
    }
    CHECK(lecun_found);
  }
  SUBCASE("a default scheme gets no fitted candidates") {
    const identification d = identify_made<float>(shape(128, 512), layer, glorot_normal{}, 13);
    REQUIRE(d.best() != nullptr);
    CHECK(d.best()->name() == "Glorot normal");
    CHECK(d.best()->parameter.empty());
    CHECK(d.ranking.size() == 18);
  }
}
