// Tests of propagate/recurrent.hpp: LSTM and GRU cells unrolled over T steps.
//
// Sources: Chen, Pennington & Schoenholz, ICML 2018 (the mean field of gated recurrent
// cells: a gate's pre-activation variance is sigma_x^2 E[x^2] + sigma_h^2 E[h^2], from
// memory); Saxe, McClelland & Ganguli, ICLR 2014 (an orthogonal matrix keeps the norm of
// every vector, so the recurrent part is exact for each draw); Gers, Schmidhuber &
// Cummins 2000 (the forget gate; c_t = f c_{t-1} + i g, so the cell path keeps a fraction
// f of the state and of its gradient each step); Jozefowicz, Zaremba & Sutskever, ICML
// 2015 (a forget bias of 1).  The state moments and the gradients through time have no
// closed form here: tests/propagate/check_recurrent.py recomputes them with NumPy from
// the same weights (extra.cmake).
#include "kindling/propagate/recurrent.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <string>

#include "../support/errors.hpp"
#include "same_draws.hpp"

using namespace kindling;
using kindling_test::check_same_draws;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
std::string gate_table(const recurrent_report& r) {
  std::string s;
  char line[160];
  for (std::size_t t = 0; t < r.gates.size(); ++t)
    for (std::size_t b = 0; b < r.gates[t].size(); ++b) {
      const measured_moment& m = r.gates[t][b];
      std::snprintf(line, sizeof line, "step %zu gate %zu: mean/predicted %.4f band x/%.4f %s\n", t, b,
                    std::exp(m.deviation), std::exp(m.tolerance), m.agrees ? "" : "NO");
      s += line;
    }
  return s;
}
std::size_t disagreeing(const recurrent_report& r) {
  std::size_t n = 0;
  for (const auto& step : r.gates)
    for (const auto& g : step) n += !g.agrees;
  return n;
}
}  // namespace

TEST_CASE("LSTM and GRU over 50 steps: every gate's pre-activation at every step agrees with the mean field") {
  // Chen, Pennington & Schoenholz 2018: q_gate(t) = sigma_x^2 E[x^2] + sigma_h^2 E[v_{t-1}^2].
  for (const cell_kind kind : {cell_kind::lstm, cell_kind::gru}) {
    CAPTURE(cell_kind_name(kind));
    const recurrent_cell cell(kind, 32, 64, 50, glorot_uniform{}, orthogonal{}, 1.0);
    const recurrent_report r = compare_recurrent(cell, 32, stream::root(11));
    INFO(gate_table(r));
    CHECK(r.gates_agree());
    CHECK(r.gates.size() == 50);
    CHECK(r.gates[0].size() == cell.gates());
    // Step 0 reads h_{-1} = 0: the gate moment is sigma_x^2 E[x^2] alone, Glorot's
    // uniform variance 2 / (fan_in + fan_out) times fan_in 32 (Glorot & Bengio 2010).
    CHECK(cell.input_scale() == doctest::Approx(32.0 * 2.0 / (32.0 + 64.0)).epsilon(1e-14));
    CHECK(r.draws[0].reads[0][0] == 0.0);
    // The state stays away from 0 and from saturation over the 50 steps.
    CHECK(r.median(&recurrent_moments::state, 49) > 0.01);
    CHECK(r.median(&recurrent_moments::state, 49) < 1.0);
  }
}

TEST_CASE("a prediction for the wrong recurrent gain or input scheme is caught (power of the gate verdict)") {
  // At 8 draws of 32 samples a gate's band is about x/1.17 (Bonferroni over 200 rows):
  // a recurrent gain of 2 (the recurrent part 4x) is caught at about half the rows, a
  // gain of 3 at nearly all (195 of 200 with this seed); step 0 reads no state.
  const recurrent_cell as_drawn(cell_kind::lstm, 32, 64, 50, glorot_uniform{}, orthogonal{3.0}, 1.0);
  const recurrent_cell assumed(cell_kind::lstm, 32, 64, 50, glorot_uniform{}, orthogonal{1.0}, 1.0);
  CHECK(disagreeing(compare_recurrent(as_drawn, assumed, 32, stream::root(12))) >= 180);
  const recurrent_cell he_drawn(cell_kind::gru, 32, 64, 50, he_normal{}, orthogonal{}, 0.0);
  const recurrent_cell glorot_assumed(cell_kind::gru, 32, 64, 50, glorot_normal{}, orthogonal{}, 0.0);
  // He's 2 / fan_in against Glorot's 2 / (fan_in + fan_out): the input part is 3x off.
  CHECK(disagreeing(compare_recurrent(he_drawn, glorot_assumed, 32, stream::root(13))) >= 3 * 45);
}

TEST_CASE("a cell's measured draws are the same bits on any executor") {
  const recurrent_cell cell(cell_kind::gru, 8, 16, 20, lecun_normal{}, orthogonal{}, 1.0);
  recurrent_options o;
  o.trials = 4;
  check_same_draws([&](auto executor) { return compare_recurrent(cell, 10, stream::root(5), o, executor); }, o.trials,
                   &recurrent_moments::state, &recurrent_moments::gates, &recurrent_moments::state_gradient);
}

TEST_CASE("a forget bias of 1 against 0: a larger LSTM cell state and gradients that reach further back in time") {
  // Gers et al. 2000: c_t = f c_{t-1} + i g, so with the gates taken as independent of
  // the state (an approximation of ours, to size the effect; the tied weights correlate
  // them) E[c^2] settles at E[i^2] E[g^2] / (1 - E[f^2]) and the cell path passes a
  // fraction E[f^2] of the squared gradient back each step.  A bias of 1 moves f from
  // about 1/2 towards sigma(1) = 0.73 (Jozefowicz et al. 2015: longer memory at the
  // start of training).
  const auto run = [](cell_kind kind, double bias) {
    return compare_recurrent(recurrent_cell(kind, 32, 64, 50, glorot_uniform{}, orthogonal{}, bias), 32,
                             stream::root(21));
  };
  const auto sq = [](double v) { return v * v; };
  const auto logistic = [](double v) { return 1.0 / (1.0 + std::exp(-v)); };
  const auto fixed_point = [&](const recurrent_report& r, double bias) {  // the approximation above, at step 49
    const auto q = [&](std::size_t b) { return r.draws[0].gates[49][b]; };
    const double i2 = gaussian_expectation([&](double z) { return sq(logistic(z)); }, 0.0, q(0));
    const double f2 = gaussian_expectation([&](double z) { return sq(logistic(z + bias)); }, 0.0, q(1));
    const double g2 = gaussian_expectation([&](double z) { return sq(std::tanh(z)); }, 0.0, q(2));
    return std::make_pair(i2 * g2 / (1.0 - f2), f2);
  };
  const recurrent_report closed = run(cell_kind::lstm, 0.0), open = run(cell_kind::lstm, 1.0);
  const auto [c0, f0] = fixed_point(closed, 0.0);
  const auto [c1, f1] = fixed_point(open, 1.0);
  const double measured = open.median(&recurrent_moments::cell, 49) / closed.median(&recurrent_moments::cell, 49);
  INFO("cell state ratio measured " << measured << ", independent-gate approximation " << c1 / c0);
  CHECK(measured > 1.3);
  CHECK(measured == doctest::Approx(c1 / c0).epsilon(0.2));
  // Memory: ln of E[(dL/dc_0)^2] / E[(dL/dc_49)^2].  Each cell keeps at least its cell
  // path, so the decay a step is no faster than E[f^2] would make it (the mean over units
  // is led by those with the most open gates); bias 1 keeps at least half the log-gap
  // that approximation gives over the 49 steps.
  const auto memory = [](const recurrent_report& r, std::vector<double> recurrent_moments::*g) {
    return std::log(r.median(g, 0) / r.median(g, 49));
  };
  const double m0 = memory(closed, &recurrent_moments::cell_gradient);
  const double m1 = memory(open, &recurrent_moments::cell_gradient);
  INFO("ln gradient ratio over 49 steps: bias 0 " << m0 << ", bias 1 " << m1 << "; E[f^2] " << f0 << " and " << f1);
  CHECK(m0 >= 49.0 * std::log(f0));
  CHECK(m1 >= 49.0 * std::log(f1));
  CHECK(m1 - m0 >= 0.5 * 49.0 * std::log(f1 / f0));
  // GRU, the bias on the update gate u (h_t = u h_{t-1} + (1 - u) n): the state's own path
  // keeps a fraction u, so the gradient also reaches further back with bias 1.
  const double g0 = memory(run(cell_kind::gru, 0.0), &recurrent_moments::state_gradient);
  const double g1 = memory(run(cell_kind::gru, 1.0), &recurrent_moments::state_gradient);
  INFO("GRU ln gradient ratio over 49 steps: bias 0 " << g0 << ", bias 1 " << g1);
  CHECK(g1 - g0 > 10.0);
}

TEST_CASE("a cell with no steps, no hidden units or a non-finite forget bias is refused, naming the argument") {
  const auto m0 = message_of<std::invalid_argument>(
      [] { recurrent_cell(cell_kind::lstm, 4, 8, 0, glorot_uniform{}); });
  CHECK(mentions(m0, "argument 'steps' = 0"));
  const auto m1 = message_of<std::invalid_argument>(
      [] { recurrent_cell(cell_kind::gru, 4, 0, 5, glorot_uniform{}); });
  CHECK(mentions(m1, "argument 'hidden' = 0"));
  const auto m2 = message_of<std::domain_error>(
      [] { recurrent_cell(cell_kind::gru, 4, 8, 5, glorot_uniform{}, orthogonal{}, std::nan("")); });
  CHECK(mentions(m2, "argument 'forget_bias' = nan"));
  const recurrent_cell a(cell_kind::lstm, 4, 8, 5, glorot_uniform{}), b(cell_kind::gru, 4, 8, 5, glorot_uniform{});
  CHECK(mentions(message_of<std::invalid_argument>([&] { compare_recurrent(a, b, 4, stream::root(1)); }),
                 "kindling::compare_recurrent: argument 'predicted' = a gru cell of hidden 8, expected the kind and sizes of "
                 "argument 'measured' (lstm, hidden 8)"));
}

TEST_CASE("rate: false-alarm rate of the gate verdict on correct cells, at or below nominal") {
  // The rule of measure.hpp over ratios to the per-draw prediction; with no finite-width
  // allowance the nominal rate is the bound.  Cells of 16 hidden units over 20 steps,
  // 8 draws of 16 samples, 100 seeds each kind.
  std::size_t tables = 0, tables_no = 0, rows = 0, rows_no = 0, default_no = 0;
  for (const cell_kind kind : {cell_kind::lstm, cell_kind::gru}) {
    for (std::uint64_t seed = 0; seed < 100; ++seed) {
      const recurrent_cell cell(kind, 8, 16, 20, glorot_uniform{}, orthogonal{}, 1.0);
      recurrent_options o;
      o.false_alarm = 0.2;
      o.finite_width_allowance = 0.0;
      const recurrent_report r = compare_recurrent(cell, 16, stream::root(1000 + seed), o);
      const std::size_t no = disagreeing(r);
      ++tables;
      tables_no += no > 0;
      rows += r.gates.size() * r.gates[0].size();
      rows_no += no;
      default_no += disagreeing(compare_recurrent(cell, 16, stream::root(1000 + seed)));
    }
  }
  const double table_rate = static_cast<double>(tables_no) / static_cast<double>(tables);
  const double row_rate = static_cast<double>(rows_no) / static_cast<double>(rows);
  MESSAGE("nominal 0.2 a table: observed " << table_rate << " a table, " << row_rate << " a row (nominal "
                                           << 0.2 / 70.0 << " for LSTM, " << 0.2 / 60.0 << " for GRU); defaults: "
                                           << default_no << " NO rows of " << rows);
  // 200 tables: a binomial at 0.2 stays below 0.3 with probability > 0.999.
  CHECK(table_rate <= 0.3);
  CHECK(default_no == 0);
}
