// Tests of schemes/bias.hpp (constant.hpp alone: tests/schemes/constant.cpp).
#include <doctest/doctest.h>

#include <cstring>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/eigen.hpp"
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

TEST_CASE("an Eigen vector is a bias vector, given as such or through view_of") {
  // The same values as a rank-1 view of the same length: the forget block of a packed
  // LSTM bias of 4 x 3 (Gers et al. 2000), the logit of 0.2 everywhere (standard formula).
  std::vector<float> plain(12, 7.0f);
  initialize_bias(strided_view<float>(plain.data(), shape(12)), forget_gate_bias{});
  Eigen::VectorXf column = Eigen::VectorXf::Constant(12, 7.0f);
  Eigen::RowVectorXf row = Eigen::RowVectorXf::Constant(12, 7.0f);
  initialize_bias(column, forget_gate_bias{});
  initialize_bias(view_of(row), forget_gate_bias{});
  CHECK(std::memcmp(column.data(), plain.data(), sizeof(float) * 12) == 0);
  CHECK(std::memcmp(row.data(), plain.data(), sizeof(float) * 12) == 0);
  Eigen::RowVectorXd logits = Eigen::RowVectorXd::Zero(5);
  initialize_bias(logits, sigmoid_target_bias{0.2});
  for (Eigen::Index i = 0; i < 5; ++i) CHECK(logits(i) == doctest::Approx(-std::log(4.0)).epsilon(1e-15));
}

TEST_CASE("one element, a segment or a strided column of a matrix is a bias vector too") {
  Eigen::VectorXd b = Eigen::VectorXd::Zero(8);
  initialize_bias(b.segment(4, 1), constant{0.5});  // one element
  for (Eigen::Index i = 0; i < 8; ++i) CHECK(b(i) == (i == 4 ? 0.5 : 0.0));
  // A part of a packed bias through a Map and as_part_of: the forget block lands where
  // the whole bias would have it.
  Eigen::VectorXf whole = Eigen::VectorXf::Zero(8), second_half = Eigen::VectorXf::Constant(4, 9.0f);
  initialize_bias(whole, forget_gate_bias{4, 2});
  initialize_bias(view_of(Eigen::Map<Eigen::VectorXf>(second_half.data(), 4)).as_part_of({8, 1}, {4, 0}),
                  forget_gate_bias{4, 2});
  CHECK(second_half == whole.tail(4));
  CHECK(second_half(0) == 1.0f);
  // A column of a row-major matrix is a bias with a stride; a Ref of a row works as well.
  Eigen::Matrix<float, 3, 4, Eigen::RowMajor> m = Eigen::Matrix<float, 3, 4, Eigen::RowMajor>::Zero();
  initialize_bias(m.col(2), forget_gate_bias{3, 1});
  Eigen::Ref<Eigen::RowVectorXf> first_row = m.row(0);
  initialize_bias(first_row, constant{0.25});
  const float expected[3][4] = {{0.25f, 0.25f, 0.25f, 0.25f}, {0, 0, 1, 0}, {0, 0, 0, 0}};
  for (int r = 0; r < 3; ++r)
    for (int c = 0; c < 4; ++c) CHECK(m(r, c) == expected[r][c]);
}

TEST_CASE("a matrix with more than one row and column is still refused as a bias, naming its shape") {
  Eigen::MatrixXf m = Eigen::MatrixXf::Constant(2, 3, 2.0f);
  const std::string msg = kindling_test::message_of<std::invalid_argument>([&] { initialize_bias(m, zeros{}); });
  CHECK_MESSAGE(kindling_test::mentions(msg, "kindling::initialize_bias: argument 'shape' = [2, 3]"), msg);
  CHECK_MESSAGE(kindling_test::mentions(msg, "one row or one column"), msg);
  CHECK((m.array() == 2.0f).all());
}
