// Tests of audit/structure.hpp: orthogonality and exactly-k sparsity.
#include <doctest/doctest.h>

#include <vector>

#include "kindling/audit/structure.hpp"
#include "kindling/schemes/orthogonal.hpp"
#include "kindling/schemes/sparse.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;

TEST_CASE("check_orthogonal passes orthogonal weights and fails Glorot weights") {
  SUBCASE("square, tall and wide, with a gain") {
    for (auto [r, c] : {std::pair<std::uint64_t, std::uint64_t>{32, 32}, {48, 16}, {16, 48}}) {
      std::vector<float> w(r * c);
      const strided_view<float> v(w.data(), shape(r, c));
      initialize(v, dense(c, r), orthogonal{1.5}, make_stream(1, "q"));
      const audit_report ok = check_orthogonal(v, 1.5);
      CHECK_MESSAGE(ok, ok.explain());
      // The same matrix declared with another gain fails.
      CHECK_FALSE(check_orthogonal(v, 1.0));
    }
  }
  SUBCASE("a random Gaussian matrix is far from orthogonal") {
    std::vector<double> w(32 * 32);
    const strided_view<double> v(w.data(), shape(32, 32));
    initialize(v, dense(32, 32), glorot_normal{}, make_stream(1, "g"));
    const audit_report bad = check_orthogonal(v, 1.0);
    CHECK_FALSE(bad);
    CHECK(bad.explain().find("Gram matrix") != std::string::npos);
  }
  SUBCASE("a convolution kernel flattened by its layout") {
    std::vector<float> w(16 * 8 * 3 * 3);
    const strided_view<float> v(w.data(), shape(16, 8, 3, 3));
    initialize(v, convolution(8, 16, {3, 3}), orthogonal{}, make_stream(2, "k"));
    CHECK(check_orthogonal(v, 1.0, 1e-5, weight_layout::out_in_spatial));
  }
}

TEST_CASE("check_sparsity counts nonzero incoming weights per unit (Martens 2010)") {
  std::vector<float> w(20 * 100);
  const strided_view<float> v(w.data(), shape(20, 100));
  initialize(v, dense(100, 20), sparse{15, 1.0}, make_stream(3, "s"));
  CHECK(check_sparsity(v, 15));
  const audit_report wrong_k = check_sparsity(v, 14);
  CHECK_FALSE(wrong_k);
  CHECK(wrong_k.explain().find("20 of 20 units") != std::string::npos);
  w[5 * 100 + 0] = w[5 * 100 + 0] == 0 ? 1.0f : 0.0f;  // one unit now has 14 or 16
  const audit_report one = check_sparsity(v, 15);
  CHECK_FALSE(one);
  CHECK(one.explain().find("unit 5") != std::string::npos);
}

TEST_CASE("structure audits reject bad arguments and report non-finite values") {
  std::vector<float> w(4 * 4, 0.5f);
  const strided_view<float> v(w.data(), shape(4, 4));
  CHECK_THROWS_AS(check_orthogonal(v, 0.0), std::domain_error);
  CHECK_THROWS_AS(check_orthogonal(v, 1.0, -1.0), std::domain_error);
  CHECK_THROWS_AS(check_sparsity(v, 5), std::invalid_argument);
  w[3] = std::nanf("");
  CHECK(check_orthogonal(v, 1.0).explain().find("NaN") != std::string::npos);
  CHECK(check_sparsity(v, 2).explain().find("not finite") != std::string::npos);
}

TEST_CASE("check_delta_orthogonal passes delta-orthogonal kernels and names an off-centre tap or a wrong gain") {
  SUBCASE("no groups, output-input-spatial, gain 1.3") {
    const convolution conv(8, 16, {3, 3});
    std::vector<float> w(16 * 8 * 3 * 3);
    const strided_view<float> v(w.data(), shape(16, 8, 3, 3));
    initialize(v, conv, delta_orthogonal{1.3}, make_stream(5, "d"));
    const audit_report ok = check_delta_orthogonal(v, conv, 1.3);
    CHECK_MESSAGE(ok, ok.explain());
    CHECK_FALSE(check_delta_orthogonal(v, conv, 1.0));  // the same kernel declared with another gain
    // One value at tap (0, 0) of output 2, input 5 (flat (2 * 8 + 5) * 9 + 0).
    w[(2 * 8 + 5) * 9] = 0.01f;
    const audit_report off = check_delta_orthogonal(v, conv, 1.3);
    CHECK_FALSE(off);
    CHECK_MESSAGE(off.explain().find("at output 2, input 5, tap 0") != std::string::npos, off.explain());
  }
  SUBCASE("two groups, spatial-input-output: each group's block is orthogonal, the whole is not") {
    const convolution conv(8, 8, {3, 3}, 2, weight_layout::spatial_in_out);  // [3, 3, 4, 8]
    std::vector<double> w(3 * 3 * 4 * 8);
    const strided_view<double> v(w.data(), shape(3, 3, 4, 8));
    initialize(v, conv, delta_orthogonal{}, make_stream(6, "d"));
    const audit_report ok = check_delta_orthogonal(v, conv);
    CHECK_MESSAGE(ok, ok.explain());
  }
  SUBCASE("an orthogonal kernel spread over every tap is not delta-orthogonal") {
    const convolution conv(8, 4, {3});
    std::vector<double> w(4 * 8 * 3);
    const strided_view<double> v(w.data(), shape(4, 8, 3));
    initialize(v, conv, orthogonal{}, make_stream(7, "q"));
    CHECK(check_orthogonal(v, 1.0, 1e-9, weight_layout::out_in_spatial));
    const audit_report r = check_delta_orthogonal(v, conv);
    CHECK_FALSE(r);
    CHECK(r.explain().find("taps other than the centre are nonzero") != std::string::npos);
  }
  SUBCASE("bad arguments") {
    std::vector<float> w(4 * 4 * 3, 0.0f);
    const strided_view<float> v(w.data(), shape(4, 4, 3));
    CHECK_THROWS_AS(check_delta_orthogonal(v, convolution(4, 4, {3}), 0.0), std::domain_error);
    CHECK_THROWS_WITH_AS(check_delta_orthogonal(strided_view<float>(w.data(), shape(4, 12)), dense(12, 4)),
                         doctest::Contains("argument 'layout' = out_in, expected a convolution layout"),
                         std::invalid_argument);
    CHECK_THROWS_AS(check_delta_orthogonal(v.sub(region(shape(0, 0, 0), shape(2, 4, 3))), convolution(4, 4, {3})),
                    std::invalid_argument);
  }
}
