// Rows of the bad-input matrix (tests/reliability/README.md) that no area test covered:
// each bad call throws the documented exception type, its message names the argument,
// its value and what was expected, and the target memory is left exactly as it was
// (the library's contract, helper rules "validate everything first, then write").
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/audit/conformance.hpp"
#include "kindling/audit/identify.hpp"
#include "kindling/audit/structure.hpp"
#include "kindling/audit/symmetry.hpp"
#include "kindling/propagate/mean_field.hpp"
#include "kindling/schemes/bias.hpp"
#include "kindling/schemes/identity.hpp"
#include "kindling/schemes/orthogonal.hpp"
#include "kindling/schemes/sparse.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
constexpr float sentinel = -7.25f;  // a value no scheme writes here

// Runs a call that must throw Ex; returns its message after checking that the buffer
// still holds the sentinel in every element.
template <class Ex, class F>
std::string refused_untouched(std::vector<float>& buffer, F&& call) {
  std::fill(buffer.begin(), buffer.end(), sentinel);
  const std::string m = message_of<Ex>(call);
  CHECK_MESSAGE(!m.empty(), "expected the call to throw");
  bool untouched = true;
  for (float x : buffer) untouched = untouched && std::memcmp(&x, &sentinel, sizeof x) == 0;
  CHECK_MESSAGE(untouched, "a refused call wrote into the buffer: " << m);
  return m;
}
const double not_a_number = std::numeric_limits<double>::quiet_NaN();
const double infinite = std::numeric_limits<double>::infinity();
}  // namespace

TEST_CASE("initialize refuses a view whose shape is not the layer's weight and writes nothing") {
  std::vector<float> w(64 * 32);
  const strided_view<float> v(w.data(), shape(64, 32));
  const std::string m = refused_untouched<std::invalid_argument>(
      w, [&] { initialize(v, dense(64, 64), he_normal{}, make_stream(1, "pump.weight")); });
  CAPTURE(m);
  CHECK(mentions(m, "shape"));
  CHECK(mentions(m, "[64, 32]"));
}

TEST_CASE("fan-scaled schemes refuse non-finite and negative parameters and write nothing") {
  std::vector<float> w(16 * 8);
  const strided_view<float> v(w.data(), shape(16, 8));
  const dense layer(8, 16);
  const stream s = make_stream(2, "valve.weight");
  for (double bad : {not_a_number, infinite, -1.0, 0.0}) {
    CAPTURE(bad);
    const std::string m = refused_untouched<std::domain_error>(
        w, [&] { initialize(v, layer, fan_scaled{bad, fan_basis::in, draw_shape::normal, 2}, s); });
    CHECK(mentions(m, "'scale'"));
  }
  for (double bad : {not_a_number, infinite}) {
    CAPTURE(bad);
    CHECK(mentions(refused_untouched<std::domain_error>(w, [&] { initialize(v, layer, glorot_uniform{bad}, s); }),
                   "'gain'"));
    CHECK(!refused_untouched<std::domain_error>(w, [&] { initialize(v, layer, he_normal{bad}, s); }).empty());
    CHECK(mentions(refused_untouched<std::domain_error>(w, [&] { initialize(v, layer, orthogonal{bad}, s); }),
                   "'gain'"));
    CHECK(mentions(refused_untouched<std::domain_error>(w, [&] { initialize(v, layer, identity{bad}, s); }),
                   "'gain'"));
  }
  CHECK(mentions(refused_untouched<std::domain_error>(
                     w, [&] { initialize(v, layer, fan_scaled{1, fan_basis::in, draw_shape::truncated_normal, not_a_number}, s); }),
                 "'cut'"));
}

TEST_CASE("structured schemes refuse shapes they cannot fill and write nothing") {
  std::vector<float> w(8 * 4 * 3);
  const strided_view<float> v(w.data(), shape(8, 4, 3));
  const convolution rectangular(4, 8, {3});
  const stream s = make_stream(3, "compressor.conv");
  SUBCASE("identity of a convolution with out != in") {
    CHECK(mentions(refused_untouched<std::invalid_argument>(w, [&] { initialize(v, rectangular, identity{}, s); }),
                   "out_channels == in_channels"));
  }
  SUBCASE("sparse with more nonzeros than the fan-in") {
    CHECK(!refused_untouched<std::invalid_argument>(w, [&] { initialize(v, rectangular, sparse{13, 1.0}, s); })
               .empty());
  }
  SUBCASE("delta-orthogonal of a dense layer") {
    std::vector<float> d(8 * 4);
    const strided_view<float> dv(d.data(), shape(8, 4));
    CHECK(mentions(refused_untouched<std::invalid_argument>(d, [&] { initialize(dv, dense(4, 8), delta_orthogonal{}, s); }),
                   "argument 'layout'"));
  }
}

TEST_CASE("bias rules refuse probabilities outside (0, 1) and write nothing") {
  std::vector<float> b(10);
  const strided_view<float> v(b.data(), shape(10));
  for (double p : {0.0, 1.0, not_a_number, -0.5, 1.5}) {
    CAPTURE(p);
    CHECK(!refused_untouched<std::domain_error>(b, [&] { initialize_bias(v, sigmoid_target_bias{p}); }).empty());
    CHECK(!refused_untouched<std::domain_error>(b, [&] { initialize_bias(v, rare_class_bias{p}); }).empty());
  }
}

TEST_CASE("audits refuse a region view, zero fans and bad levels, naming the argument") {
  std::vector<float> w(16 * 16, 0.25f);
  const strided_view<const float> whole(w.data(), shape(16, 16));
  const strided_view<const float> part(w.data(), shape(32, 16), region(shape(0, 0), shape(16, 16)));
  CHECK(mentions(message_of<std::invalid_argument>([&] { (void)check_orthogonal(part); }), "argument 'view'"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { (void)check_sparsity(part, 2); }), "argument 'view'"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { (void)check_sparsity(whole, 17); }), "argument 'k' = 17"));
  CHECK(mentions(message_of<std::domain_error>([&] { (void)check_orthogonal(whole, not_a_number); }), "argument 'gain'"));
  CHECK(mentions(message_of<std::domain_error>([&] { (void)check_orthogonal(whole, 1, -1); }), "argument 'tolerance'"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { (void)identify_scheme(whole, weight_info{fans{0, 16, 1}}); }),
                 "argument 'fans'"));
  CHECK(!message_of<std::invalid_argument>([&] { (void)check_scheme(whole, dense(8, 16), he_normal{}); }).empty());
}

TEST_CASE("identification of a tensor holding infinities names them and ranks nothing") {
  std::vector<float> w(16 * 16, 0.5f);
  w[17] = std::numeric_limits<float>::infinity();
  const identification id = identify_scheme(strided_view<const float>(w.data(), shape(16, 16)), dense(16, 16));
  CHECK(mentions(id.structure, "non-finite"));
  CHECK(mentions(id.structure, "flat index 17"));
  CHECK(id.best() == nullptr);
}

TEST_CASE("a layer stack refuses a zero width and non-finite variances, naming them") {
  CHECK(!message_of<std::invalid_argument>([] { layer_stack s(0); }).empty());
  layer_stack s(8);
  CHECK(!message_of<std::exception>([&] { s.add_dense(0, activation::relu(), he_normal{}); }).empty());
  CHECK(!message_of<std::exception>([&] { s.add_dense(8, activation::relu(), he_normal{}, not_a_number); }).empty());
  CHECK(!message_of<std::exception>([&] { s.add_dense(8, activation::relu(), he_normal{}, -1.0); }).empty());
}
