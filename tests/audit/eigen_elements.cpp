// The audits on Eigen's 16-bit element types: Eigen::bfloat16 and Eigen::half hold
// kindling's bfloat16 and float16 values (eigen.hpp forwards their traits), so
// check_scheme tests them against the same discrete stored distribution
// (audit/detail/stored.hpp) and counts them by bit pattern, as kindling's own types.
#include <doctest/doctest.h>

#include <Eigen/Dense>

#include "kindling/audit/conformance.hpp"
#include "kindling/eigen.hpp"
#include "kindling/kindling.hpp"

using namespace kindling;

TEST_CASE("check_scheme passes correct Eigen::bfloat16 and Eigen::half weights of 2 million values") {
  // Before the audits tested stored values, a 2048 x 2048 bfloat16 tensor failed
  // Kolmogorov-Smirnov for every seed: a few thousand distinct values against a
  // continuous CDF.
  using bf16_matrix = Eigen::Matrix<Eigen::bfloat16, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  using f16_matrix = Eigen::Matrix<Eigen::half, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  const dense layer(2048, 1024);  // weight [1024, 2048]
  for (std::uint64_t seed = 1; seed <= 3; ++seed) {
    bf16_matrix b(1024, 2048);
    f16_matrix h(1024, 2048);
    initialize(view_of(b), layer, he_normal{}, make_stream(seed, "heat_exchanger.coil.weight"));
    initialize(view_of(h), layer, glorot_uniform{}, make_stream(seed, "heat_exchanger.fan.weight"));
    const audit_report rb = check_scheme(view_of(static_cast<const bf16_matrix&>(b)), layer, he_normal{});
    const audit_report rh = check_scheme(view_of(static_cast<const f16_matrix&>(h)), layer, glorot_uniform{});
    CHECK_MESSAGE(rb.passed(), rb.explain());
    CHECK_MESSAGE(rh.passed(), rh.explain());
  }
  // Power: weights drawn for fan-in 1024, declared with fan-in 2048, fail the variance check.
  bf16_matrix b(2048, 1024);
  initialize(view_of(b), dense(1024, 2048), he_normal{}, make_stream(9, "heat_exchanger.coil.weight"));
  const audit_report wrong = check_scheme(strided_view<const Eigen::bfloat16>(b.data(), shape(1024, 2048)), layer,
                                          he_normal{});
  REQUIRE(wrong.find("variance") != nullptr);
  CHECK_FALSE(wrong.find("variance")->passed);
}
