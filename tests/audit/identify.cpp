// Tests of audit/identify.hpp: tensors made by each scheme are identified as that
// scheme with the right fan, on a layer whose fans are all different (fan-in 512,
// fan-out 128, fan-average 320), so each candidate has its own variance (the published
// formulas of REFERENCES.md). With 65536 values the nearest wrong candidate is far
// beyond the KS critical distance, so misidentification has probability below 1e-9 per
// seed (and the seeds are fixed).
#include "kindling/audit/identify.hpp"

#include <doctest/doctest.h>

#include <vector>

#include "../support/errors.hpp"
#include "kindling/schemes/sparse.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
template <class Scheme>
identification identify_made_by(const Scheme& scheme, std::uint64_t seed) {
  const dense layer(512, 128);
  std::vector<float> w(128 * 512);
  const strided_view<float> v(w.data(), shape(128, 512));
  initialize(v, layer, scheme, make_stream(seed, "pump.encoder.weight"));
  return identify_scheme(v, layer);
}
}  // namespace

TEST_CASE("identification names the scheme and the fan that made a tensor") {
  struct expected { identification got; const char* scheme; const char* fan; };
  const expected cases[] = {
      {identify_made_by(glorot_uniform{}, 1), "Glorot uniform", "fan-average 320"},
      {identify_made_by(glorot_normal{}, 2), "Glorot normal", "fan-average 320"},
      {identify_made_by(he_uniform{}, 3), "He uniform", "fan-in 512"},
      {identify_made_by(he_normal{}, 4), "He normal", "fan-in 512"},
      {identify_made_by(he_normal(0, fan_basis::out), 5), "He normal", "fan-out 128"},
      {identify_made_by(lecun_uniform{}, 6), "LeCun uniform", "fan-in 512"},
      {identify_made_by(lecun_normal{}, 7), "LeCun normal", "fan-in 512"},
      {identify_made_by(fan_scaled{2, fan_basis::in, draw_shape::truncated_normal, 2}, 8), "He truncated normal",
       "fan-in 512"},
  };
  for (const expected& c : cases) {
    REQUIRE(c.got.best() != nullptr);
    CAPTURE(c.got.best()->text());
    CHECK(c.got.best()->scheme == c.scheme);
    CHECK(mentions(c.got.best()->fan, c.fan));
    CHECK(c.got.best()->score > 1e-4);        // the true candidate is not rejected
    CHECK(c.got.ranking[1].score < 1e-6);     // the runner-up is
    CHECK(c.got.ranking.size() == 18);        // 2 scales x 3 fans x 3 draws
  }
}

TEST_CASE("identification names constant, sparse and non-finite tensors by their structure") {
  std::vector<float> w(64 * 32, 0.5f);
  const strided_view<float> v(w.data(), shape(64, 32));
  CHECK(identify_scheme(v, dense(32, 64)).structure == "constant 0.5");
  initialize(v, dense(32, 64), sparse{4, 1.0}, make_stream(1, "s"));
  CHECK(identify_scheme(v, dense(32, 64)).structure == "sparse, 4 nonzero a unit");
  w[0] = std::nanf("");
  CHECK(mentions(identify_scheme(v, dense(32, 64)).structure, "non-finite"));
  CHECK(identify_scheme(v, dense(32, 64)).best() == nullptr);
}

TEST_CASE("identification refuses fans of zero and shapes that are not the layer's") {
  std::vector<float> w(16, 0.5f);
  const strided_view<const float> v(w.data(), shape(4, 4));
  CHECK(mentions(message_of<std::invalid_argument>([&] { (void)identify_scheme(v, weight_info{fans{0, 4, 1}}); }),
                 "argument 'fans'"));
  CHECK(!message_of<std::invalid_argument>([&] { (void)identify_scheme(v, dense(3, 4)); }).empty());
}
