// Exports draw 0 of an LSTM and a GRU cell unrolled over 50 steps for
// tests/propagate/check_recurrent.py: the drawn input and recurrent weights, the bias,
// the inputs and the loss gradient as .npy files in the directory given, and on stdout
// one JSON object a cell with the per-step second moments compare_recurrent measured in
// that draw (gates, states, gradients through time).
// Not a doctest file: reference/ is outside the glob of tests/CMakeLists.txt, so this
// program keeps its own main (built by kindling_reference_check).
#include <cstdio>
#include <string>
#include <vector>

#include "kindling/propagate/recurrent.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include "export.hpp"

using namespace kindling;
using kindling_test::save_npy;

namespace {
void series(const char* name, const std::vector<double>& v) {
  std::printf(", \"%s\": [", name);
  for (std::size_t t = 0; t < v.size(); ++t) std::printf("%s%.17g", t ? ", " : "", v[t]);
  std::printf("]");
}

void export_cell(const std::string& dir, const recurrent_cell& cell, std::uint64_t batch, std::uint64_t seed,
                 bool first) {
  recurrent_options o;
  o.trials = 2;
  const recurrent_report r = compare_recurrent(cell, batch, stream::root(seed), o);
  const stream t = stream::root(seed).indexed(0);  // draw 0, as compare_recurrent draws it
  const realized_cell net = draw_recurrent(cell, t);
  Eigen::MatrixXd x(static_cast<Eigen::Index>(cell.steps() * cell.input_width()), static_cast<Eigen::Index>(batch));
  fill(view_of(x), dist::normal{0.0, 1.0}, t.named("input"));
  Eigen::MatrixXd g(static_cast<Eigen::Index>(cell.hidden()), static_cast<Eigen::Index>(batch));
  fill(view_of(g), dist::normal{0.0, 1.0}, t.named("output_gradient"));
  const std::string stem = dir + "/" + cell_kind_name(cell.kind());
  save_npy(stem + ".input_weight.npy", net.input_weight);
  save_npy(stem + ".recurrent_weight.npy", net.recurrent_weight);
  save_npy(stem + ".bias.npy", net.bias);
  save_npy(stem + ".input.npy", x);
  save_npy(stem + ".output_gradient.npy", g);
  const recurrent_moments& m = r.draws[0];
  std::printf("%s{\"kind\": \"%s\", \"steps\": %llu, \"gates\": [", first ? "[" : ",\n", cell_kind_name(cell.kind()),
              static_cast<unsigned long long>(cell.steps()));
  for (std::size_t s = 0; s < m.gates.size(); ++s) {
    std::printf("%s[", s ? ", " : "");
    for (std::size_t b = 0; b < m.gates[s].size(); ++b) std::printf("%s%.17g", b ? ", " : "", m.gates[s][b]);
    std::printf("]");
  }
  std::printf("]");
  series("state", m.state);
  series("cell", m.cell);
  series("state_gradient", m.state_gradient);
  series("cell_gradient", m.cell_gradient);
  std::printf("}");
}
}  // namespace

int main(int argc, char** argv) {
  return kindling_test::export_to_directory(argc, argv, [](const std::string& dir) {
    export_cell(dir, recurrent_cell(cell_kind::lstm, 12, 24, 50, glorot_uniform{}, orthogonal{}, 1.0), 16, 7, true);
    export_cell(dir, recurrent_cell(cell_kind::gru, 12, 24, 50, lecun_normal{}, orthogonal{1.2}, 0.5), 16, 8, false);
    std::printf("]\n");
  });
}
