// Tests of audit/structure.hpp, check_orthogonal of packed gate layers (packed_dense):
// each gate block is checked on its own, as initialize() makes each block orthogonal.
// The property checked, Q Qᵀ = gain² I (or Qᵀ Q) per block, is the definition of an
// orthogonal initialization (Saxe, McClelland & Ganguli, ICLR 2014); the stacked matrix of
// k square orthogonal blocks has Qᵀ Q = k I instead, which is why a whole-matrix check fails.
#include <doctest/doctest.h>

#include <vector>

#include "kindling/audit/structure.hpp"
#include "kindling/schemes/fan_scaled.hpp"
#include "kindling/schemes/orthogonal.hpp"

using namespace kindling;

namespace {
// A square-gated recurrent GRU weight [3h, h], drawn block-wise orthogonal by initialize().
struct gru_weight {
  explicit gru_weight(std::uint64_t h, const char* name)
      : layer(packed_dense::gru(h, h)), values(3 * h * h), view(values.data(), shape(3 * h, h)) {
    initialize(view, layer, orthogonal{}, make_stream(3, name));
  }
  gru_weight(const gru_weight&) = delete;  // view points into values
  packed_dense layer;
  std::vector<float> values;
  strided_view<float> view;
};

// The finding `check` of block b (the report prefixes its sentences with "block b: ").
audit_finding block_finding(const audit_report& r, std::uint64_t b, const std::string& check) {
  const std::string prefix = "block " + std::to_string(b) + ": ";
  for (const audit_finding& f : r.findings()) {
    if (f.check == check && f.sentence.rfind(prefix, 0) == 0) return f;
  }
  FAIL("no finding '" << check << "' of block " << b << " in:\n" << r.explain());
  return {};
}
}  // namespace

TEST_CASE("check_orthogonal of a packed recurrent weight checks each gate block") {
  SUBCASE("a GRU recurrent weight [3h, h] drawn block-wise orthogonal passes block by block") {
    const gru_weight w(20, "conveyor.gru.w_hh");
    const strided_view<float>& v = w.view;
    const packed_dense& gru = w.layer;
    const audit_report each = check_orthogonal(v, gru);
    CHECK_MESSAGE(each, each.explain());
    CHECK(each.findings().size() == 6);  // finite and orthogonal, for 3 blocks
    CHECK(block_finding(each, 2, "orthogonal").passed);
    // The whole stack is not orthogonal: its Gram matrix has 3 on the diagonal.
    CHECK_FALSE(check_orthogonal(v, 1.0));
  }
  SUBCASE("an LSTM weight stored input-major [h, 4h], with a gain") {
    const std::uint64_t h = 12;
    const auto lstm = packed_dense::lstm(h, h, weight_layout::in_out);
    std::vector<double> w(h * 4 * h);
    const strided_view<double> v(w.data(), shape(h, 4 * h));
    initialize(v, lstm, orthogonal{0.5}, make_stream(4, "pump.lstm.w_hh"));
    CHECK(check_orthogonal(v, lstm, 0.5));
    CHECK_FALSE(check_orthogonal(v, lstm, 1.0));  // the same blocks declared with another gain
  }
  SUBCASE("a wrong block is named") {
    const std::uint64_t h = 16;
    gru_weight w(h, "heat.gru.w_hh");
    const strided_view<float>& v = w.view;
    // Block 1 redrawn with Glorot normal values: orthogonal in no sense.
    initialize(v.sub(region(shape(h, 0), shape(h, h))).as_part_of(shape(h, h), shape(0, 0)), dense(h, h),
               glorot_normal{}, make_stream(5, "noise"));
    const audit_report r = check_orthogonal(v, w.layer);
    CHECK_FALSE(r);
    const audit_finding wrong = block_finding(r, 1, "orthogonal");
    CHECK_FALSE(wrong.passed);
    CHECK_MESSAGE(wrong.sentence.find("block 1: the rows are not orthonormal") == 0, wrong.sentence);
    CHECK(block_finding(r, 0, "orthogonal").passed);
    CHECK(block_finding(r, 2, "orthogonal").passed);
  }
}

TEST_CASE("check_orthogonal of a packed layer refuses a region or a wrong shape, naming it") {
  const auto gru = packed_dense::gru(4, 4);
  std::vector<float> w(12 * 4, 0.0f);
  const strided_view<float> whole(w.data(), shape(12, 4));
  CHECK_THROWS_WITH_AS(check_orthogonal(whole.sub(region(shape(0, 0), shape(4, 4))), gru),
                       doctest::Contains("argument 'view' holds only the region"), std::invalid_argument);
  CHECK_THROWS_AS(check_orthogonal(strided_view<float>(w.data(), shape(4, 12)), gru), std::invalid_argument);
  CHECK_THROWS_AS(check_orthogonal(whole, gru, 0.0), std::domain_error);
}
