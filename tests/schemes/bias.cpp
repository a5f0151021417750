// Tests of schemes/bias.hpp and schemes/constant.hpp.
#include <doctest/doctest.h>

#include <vector>

#include "../support/errors.hpp"
#include "kindling/schemes/bias.hpp"

using namespace kindling;

TEST_CASE("biases start at zero, or at a constant (common practice)") {
  std::vector<float> b(7, 9.0f);
  initialize_bias(strided_view<float>(b.data(), shape(7)), zeros{});
  for (float x : b) CHECK(x == 0.0f);
  initialize_bias(strided_view<float>(b.data(), shape(7)), constant{0.25});
  for (float x : b) CHECK(x == 0.25f);
}

TEST_CASE("sigmoid_target_bias is the logit of the target activation") {
  // logit(0.1) = -ln 9 = -2.1972245773362196 (standard formula).
  CHECK(sigmoid_target_bias{0.1}.value() == doctest::Approx(-2.1972245773362196).epsilon(1e-15));
  CHECK(sigmoid_target_bias{0.5}.value() == 0.0);
  std::vector<double> b(3);
  initialize_bias(strided_view<double>(b.data(), shape(3)), sigmoid_target_bias{0.1});
  for (double x : b) CHECK(1 / (1 + std::exp(-x)) == doctest::Approx(0.1).epsilon(1e-14));
}

TEST_CASE("rare_class_bias is -log((1-prior)/prior) (Lin et al., ICCV 2017)") {
  // prior 0.01, the paper's value: -ln 99 = -4.59511985013459 (standard formula).
  CHECK(rare_class_bias{0.01}.value() == doctest::Approx(-4.59511985013459).epsilon(1e-14));
}

TEST_CASE("forget_gate_bias sets the forget block of a packed LSTM bias to 1 (Gers et al. 2000)") {
  std::vector<float> b(4 * 5, 7.0f);
  initialize_bias(strided_view<float>(b.data(), shape(20)), forget_gate_bias{});
  for (std::size_t i = 0; i < 20; ++i) CHECK(b[i] == (i >= 5 && i < 10 ? 1.0f : 0.0f));
}

TEST_CASE("bias rules reject bad arguments and write nothing") {
  std::vector<float> b(6, 2.0f);
  const strided_view<float> v(b.data(), shape(6));
  CHECK_THROWS_AS(initialize_bias(v, sigmoid_target_bias{1.0}), std::domain_error);
  CHECK_THROWS_AS(initialize_bias(v, rare_class_bias{0.0}), std::domain_error);
  CHECK_THROWS_AS(initialize_bias(v, constant{std::nan("")}), std::domain_error);
  const std::string msg = kindling_test::message_of<std::invalid_argument>([&] { initialize_bias(v, forget_gate_bias{4}); });
  CHECK_MESSAGE(kindling_test::mentions(msg, "'blocks' = 4"), msg);
  std::vector<float> m(6, 2.0f);
  CHECK_THROWS_AS(initialize_bias(strided_view<float>(m.data(), shape(2, 3)), zeros{}), std::invalid_argument);
  for (float x : b) CHECK(x == 2.0f);
  for (float x : m) CHECK(x == 2.0f);
}
