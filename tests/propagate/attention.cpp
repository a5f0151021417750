// Tests of propagate/attention.hpp: query, key, value and output projections with the
// softmax over scaled scores, single and multi-head.
//
// Sources: Vaswani et al., NeurIPS 2017, sec. 3.2.1 and its footnote 4 (q . k of d_k
// independent zero-mean unit-variance components has variance d_k, hence the 1/sqrt(d_k);
// from memory); Glorot & Bengio, AISTATS 2010 (Glorot variance 2 / (fan_in + fan_out));
// LeCun et al. 1998 (1 / fan_in); a dense layer's output moment fan_in Var W E[x^2]
// (common practice).  The 1 + 2/(d L) of the scores' mean over Gaussian inputs and the
// conditional predictions of the mix and output are derived in the header comment (ours).
// The backward predictions (mix, softmax weights, values) are derived the same way in the
// header comment (ours; the chain rule of the forward pass).  The softmax weights, the
// scores' and the queries' and keys' gradients have no closed form: measured only, and
// the whole pass, forward and backward, is checked against NumPy from the same weights
// (tests/propagate/check_attention.py, extra.cmake; its backward pass against finite
// differences).
#include "kindling/propagate/attention.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <sstream>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "same_draws.hpp"

using namespace kindling;
using kindling_test::check_same_draws;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
// Verdicts that say NO, forward and backward.
std::size_t disagreeing(const attention_report& r) {
  std::size_t n = 0;
  for (const auto& row : r.rows) n += (row.judged && !row.verdict.agrees) + (row.gradient_judged && !row.gradient_verdict.agrees);
  return n;
}
}  // namespace

TEST_CASE("attention, one head and several: every projection, the scores, the mix and the output agree forward and "
          "backward, seeds") {
  for (const std::uint64_t seed : {1, 2, 3, 4}) {
    for (const std::uint64_t heads : {1, 4}) {
      CAPTURE(seed);
      CAPTURE(heads);
      const attention_block glorot(64, heads, 16, glorot_uniform{}, glorot_uniform{});
      const attention_report a = compare_attention(glorot, 8, stream::root(seed));
      INFO(a.table());
      CHECK(a.all_agree());
      const attention_block lecun(48, heads, 12, lecun_normal{}, glorot_normal{});
      const attention_report b = compare_attention(lecun, 8, stream::root(100 + seed));
      INFO(b.table());
      CHECK(b.all_agree());
    }
  }
  // The planned values from the schemes alone: Glorot on [64, 64] draws Var W = 2/128
  // (Glorot & Bengio 2010), so E[q^2] = 64/64 = 1 and E[s^2] = 1 (1 + 2/(64 16)).
  const attention_block block(64, 4, 16, glorot_uniform{}, glorot_uniform{});
  CHECK(block.projection_moment(0, 1.0) == doctest::Approx(1.0).epsilon(1e-14));
  CHECK(block.score_moment(1.0) == doctest::Approx(1.0 + 2.0 / 1024.0).epsilon(1e-14));
  const attention_report r = compare_attention(block, 16, stream::root(9));
  // The unconditional plan against the median measured: the draws spread by about
  // x/1.1 at this size, so the median sits within 15% of the plan.
  CHECK(r.row("query").median == doctest::Approx(r.row("query").planned).epsilon(0.15));
  CHECK(r.row("score").median == doctest::Approx(r.row("score").planned).epsilon(0.15));
  CHECK(std::isnan(r.row("mix").planned));
  CHECK(!r.row("softmax").judged);
  // Backward from a unit loss gradient: E[(dL/do)^2] = d Var W_o = 1 (a dense layer's
  // backward pass, fan-out 64: common practice), E[(dL/dp)^2] = d_k E[(dL/do)^2] d Var W_v
  // E[x^2] = 16 (header comment); the scores', queries' and keys' gradients go through
  // the softmax's Jacobian: measured only.
  CHECK(r.row("mix").planned_gradient == doctest::Approx(1.0).epsilon(1e-14));
  CHECK(r.row("softmax").planned_gradient == doctest::Approx(16.0).epsilon(1e-14));
  CHECK(r.row("mix").gradient_median == doctest::Approx(1.0).epsilon(0.15));
  CHECK(r.row("softmax").gradient_median == doctest::Approx(16.0).epsilon(0.15));
  CHECK(r.row("output").gradient_median == doctest::Approx(1.0).epsilon(0.05));
  for (const char* name : {"query", "key", "score"}) {
    CAPTURE(name);
    CHECK(std::isnan(r.row(name).planned_gradient));
    CHECK(!r.row(name).gradient_judged);
    CHECK(r.row(name).gradient_median > 0.0);
  }
  CHECK(r.row("value").gradient_judged);
  CHECK(r.input_gradient() > 0.0);
  // Each row carries its own tensor's moment of every draw, in the order of r.draws.
  REQUIRE(r.row("key").draws.size() == r.draws.size());
  REQUIRE(r.row("softmax").gradient_draws.size() == r.draws.size());
  for (std::size_t k = 0; k < r.draws.size(); ++k) {
    CHECK(r.row("key").draws[k] == r.draws[k].key);
    CHECK(r.row("softmax").draws[k] == r.draws[k].concentration);
    CHECK(r.row("softmax").gradient_draws[k] == r.draws[k].softmax_gradient);
    CHECK(r.row("output").gradient_draws[k] == r.draws[k].output_gradient);
  }
  // Scores of variance about 1 over 16 keys: attention between uniform (1/16) and one-hot.
  CHECK(r.row("softmax").median > 1.0 / 16.0);
  CHECK(r.row("softmax").median < 0.3);
}

TEST_CASE("projections drawn 3x too large: scores 81x, a saturated softmax, and every predicted row flagged") {
  // Gain 3 on Glorot: Var W 9x, so E[q^2] and E[k^2] 9x and E[s^2] = Var q Var k 81x
  // (Vaswani et al. 2017, footnote 4, with components of variance 9 on each side).
  const attention_block drawn(64, 4, 16, glorot_uniform{3.0}, glorot_uniform{3.0});
  const attention_block assumed(64, 4, 16, glorot_uniform{}, glorot_uniform{});
  const attention_report bad = compare_attention(drawn, assumed, 8, stream::root(31));
  const attention_report good = compare_attention(assumed, 8, stream::root(31));
  INFO(bad.table());
  INFO(good.table());
  CHECK(disagreeing(bad) == 9);  // six forward verdicts, and backward the mix, softmax and value
  CHECK(std::exp(bad.row("score").verdict.deviation) == doctest::Approx(81.0).epsilon(0.2));
  CHECK(bad.row("score").median / good.row("score").median == doctest::Approx(81.0).epsilon(0.2));
  // Saturation: with a score standard deviation of about 9 the largest weight of a row
  // takes most of the mass; at gain 1 it does not.
  const double saturated = detail::median_of([&] {
    std::vector<double> v;
    for (const auto& m : bad.draws) v.push_back(m.largest_weight);
    return v;
  }());
  const double healthy = detail::median_of([&] {
    std::vector<double> v;
    for (const auto& m : good.draws) v.push_back(m.largest_weight);
    return v;
  }());
  MESSAGE("largest softmax weight: gain 3 " << saturated << ", gain 1 " << healthy << "; concentration "
                                            << bad.row("softmax").median << " and " << good.row("softmax").median);
  CHECK(saturated > 0.8);
  CHECK(healthy < 0.5);
  // Only the value projection 3x too large: the scores agree, the value, the mix and the
  // output do not.
  std::array<projection_scheme, 4> s{projection_scheme::of(glorot_uniform{}, 64), projection_scheme::of(glorot_uniform{}, 64),
                                     projection_scheme::of(glorot_uniform{3.0}, 64), projection_scheme::of(glorot_uniform{}, 64)};
  const attention_block value_only(64, 4, 16, std::move(s), "attention");
  const attention_report v = compare_attention(value_only, assumed, 8, stream::root(32));
  INFO(v.table());
  CHECK(v.row("score").verdict.agrees);
  CHECK(!v.row("value").verdict.agrees);
  CHECK(!v.row("mix").verdict.agrees);
  CHECK(v.row("output").verdict.agrees);  // given the mix it read, W_o is as assumed
  // Backward: dL/dp_ij = dL/do_i . v_j reads W_v (9x); dL/do and dL/dv read W_o only.
  CHECK(!v.row("softmax").gradient_verdict.agrees);
  CHECK(std::exp(v.row("softmax").gradient_verdict.deviation) == doctest::Approx(9.0).epsilon(0.2));
  CHECK(v.row("mix").gradient_verdict.agrees);
  CHECK(v.row("value").gradient_verdict.agrees);
  CHECK(disagreeing(v) == 3);
}

TEST_CASE("an output projection drawn 3x too large is flagged forward at the output and backward at the mix and "
          "value, and nowhere else") {
  // W_o at gain 3: Var W_o 9x, so E[y^2] 9x given the mix, E[(dL/do)^2] = Var W_o |g|^2
  // 9x, and dL/dv_j = W_o^T (sum_i p_ij g_i) 9x (header comment).  The softmax's gradient
  // reads dL/do as computed, times W_v as assumed: it agrees given the draw.
  const attention_block assumed(64, 4, 16, glorot_uniform{}, glorot_uniform{});
  const attention_block drawn(64, 4, 16, glorot_uniform{}, glorot_uniform{3.0});
  const attention_report r = compare_attention(drawn, assumed, 8, stream::root(33));
  INFO(r.table());
  CHECK(!r.row("output").verdict.agrees);
  CHECK(!r.row("mix").gradient_verdict.agrees);
  CHECK(!r.row("value").gradient_verdict.agrees);
  CHECK(std::exp(r.row("mix").gradient_verdict.deviation) == doctest::Approx(9.0).epsilon(0.2));
  CHECK(disagreeing(r) == 3);
  CHECK(r.row("softmax").gradient_median / r.row("softmax").planned_gradient == doctest::Approx(9.0).epsilon(0.2));
  // The table says which direction disagrees.
  CHECK(mentions(r.table(), "disagrees backward: mean/predicted = "));
  CHECK(mentions(r.table(), "disagrees forward: mean/predicted = "));
}

TEST_CASE("an attention block's measured draws are the same bits on any executor") {
  const attention_block block(32, 2, 8, lecun_normal{}, lecun_normal{});
  attention_options o;
  o.trials = 4;
  check_same_draws([&](auto executor) { return compare_attention(block, 5, stream::root(5), o, executor); }, o.trials,
                   &attention_moments::output, &attention_moments::score, &attention_moments::mix,
                   &attention_moments::input_gradient, &attention_moments::softmax_gradient);
}

TEST_CASE("an attention block with heads not dividing the width, no tokens or no width is refused, naming it") {
  CHECK(mentions(message_of<std::invalid_argument>([] { attention_block(64, 5, 16, glorot_uniform{}); }),
                 "kindling::attention_block: argument 'heads' = 5, expected a divisor of width = 64"));
  CHECK(mentions(message_of<std::invalid_argument>([] { attention_block(64, 4, 0, glorot_uniform{}); }),
                 "argument 'length' = 0"));
  CHECK(mentions(message_of<std::invalid_argument>([] { attention_block(0, 1, 4, glorot_uniform{}); }),
                 "argument 'width' = 0"));
  const attention_block a(16, 2, 4, glorot_uniform{}), b(16, 4, 4, glorot_uniform{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { compare_attention(a, b, 4, stream::root(1)); }),
                 "argument 'predicted' has width 16, 4 heads"));
  const realized_attention net = draw_attention(a, stream::root(1));
  const Eigen::MatrixXd x = Eigen::MatrixXd::Ones(16, 8), g = Eigen::MatrixXd::Ones(16, 4);
  CHECK(mentions(message_of<std::invalid_argument>([&] { run_attention(a, net, x, g); }),
                 "kindling::run_attention: argument 'output_gradient' is 16 x 4, expected the shape of argument 'input' "
                 "(16 x 8)"));
}

TEST_CASE("rate: false-alarm rate of the attention verdict on correct blocks, at or below nominal") {
  // measure.hpp's rule over the ratios to the prediction given each draw; with no
  // allowance the nominal rate is the bound.  Small blocks (width 16, 1 and 4 heads,
  // 8 tokens, 8 draws of 4 sequences) and larger ones (width 64, 4 heads, 16 tokens),
  // Glorot and LeCun.
  std::size_t tables = 0, tables_no = 0, rows = 0, rows_no = 0, default_no = 0;
  const auto run = [&](const attention_block& block, std::uint64_t batch, std::uint64_t seed) {
    attention_options o;
    o.false_alarm = 0.2;
    o.finite_width_allowance = 0.0;
    const std::size_t no = disagreeing(compare_attention(block, batch, stream::root(seed), o));
    ++tables;
    tables_no += no > 0;
    rows += 9;  // verdicts: six forward, three backward
    rows_no += no;
    default_no += disagreeing(compare_attention(block, batch, stream::root(seed)));
  };
  for (std::uint64_t seed = 0; seed < 100; ++seed) {
    run(attention_block(16, 1 + 3 * (seed % 2), 8, glorot_uniform{}, glorot_uniform{}), 4, 5000 + seed);
    run(attention_block(16, 1 + 3 * (seed % 2), 8, lecun_normal{}, lecun_normal{}), 4, 6000 + seed);
  }
  for (std::uint64_t seed = 0; seed < 40; ++seed)
    run(attention_block(64, 4, 16, glorot_normal{}, glorot_uniform{}), 8, 7000 + seed);
  const double table_rate = static_cast<double>(tables_no) / static_cast<double>(tables);
  const double row_rate = static_cast<double>(rows_no) / static_cast<double>(rows);
  MESSAGE("nominal 0.2 a table: observed " << table_rate << " a table, " << row_rate << " a verdict (nominal "
                                           << 0.2 / 9.0 << "); defaults: " << default_no << " NO verdicts of " << rows);
  // 240 tables: a binomial at 0.2 stays below 0.29 with probability > 0.999.
  CHECK(table_rate <= 0.29);
  CHECK(default_no == 0);
}

// The table has the columns of propagation_report::table() and `kindling plan` (one
// formatter, detail::table_line): a projection row is a dense layer of fans (d, d)
// without an activation, its weights' sd LeCun's sqrt(1/fan_in) (LeCun et al. 1998,
// sec. 4.6; common practice) = sqrt(1/32); the softmax row has no forward prediction
// ("measured") but a backward one, d_k (d Var W_o) (d Var W_v) E[x^2] = 16 x 1 x 1 = 16
// (header comment), and a backward verdict; the score row has neither backward.
TEST_CASE("an attention table has the propagation table's columns") {
  const attention_block block(32, 2, 8, lecun_normal{}, lecun_normal{});
  attention_options o;
  o.trials = 4;
  const attention_report r = compare_attention(block, 5, stream::root(5), o);
  const auto words = [](const std::string& line) {
    std::istringstream in(line);
    std::vector<std::string> w;
    for (std::string x; in >> x;) w.push_back(x);
    return w;
  };
  std::istringstream text(r.table());
  std::vector<std::vector<std::string>> lines;
  for (std::string line; std::getline(text, line);) lines.push_back(words(line));
  REQUIRE(lines.size() >= 8);
  CHECK(lines[0] == std::vector<std::string>{"#", "layer", "fan_in", "fan_out", "activation", "scheme", "weight_sd",
                                             "fwd_var", "bwd_var", "fwd_med", "x/", "bwd_med", "x/", "agrees"});
  REQUIRE(lines[1].size() == 14);
  CHECK(lines[1][1] == "query");
  CHECK(lines[1][2] == "32");
  CHECK(lines[1][3] == "32");
  CHECK(lines[1][4] == "identity");
  CHECK(lines[1][5] == block.scheme(0));
  CHECK(std::stod(lines[1][6]) == doctest::Approx(std::sqrt(1.0 / 32)).epsilon(1e-3));
  REQUIRE(lines[5].size() == 14);
  CHECK(lines[5][1] == "softmax");
  CHECK(lines[5][7] == "measured");
  CHECK(lines[5][8] == "16");
  CHECK((lines[5][13] == "yes" || lines[5][13] == "NO"));
  REQUIRE(lines[4].size() == 14);
  CHECK(lines[4][8] == "measured");
  CHECK(std::stod(lines[4][11]) == doctest::Approx(r.row("score").gradient_median).epsilon(1e-3));
}
