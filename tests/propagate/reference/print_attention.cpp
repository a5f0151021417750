// Exports draw 0 of two attention blocks (one head and four) for
// tests/propagate/check_attention.py: the four drawn projections and the inputs as .npy
// files in the directory given, with the loss gradient sent back, and on stdout one JSON
// object a block with the moments compare_attention measured in that draw, forward and
// backward.
// Not a doctest file: reference/ is outside the glob of tests/CMakeLists.txt, so this
// program keeps its own main (built by kindling_reference_check).
#include <cstdio>
#include <string>
#include <vector>

#include "kindling/propagate/attention.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include "export.hpp"

using namespace kindling;
using kindling_test::save_npy;

namespace {
void export_block(const std::string& dir, const std::string& name, const attention_block& block, std::uint64_t batch,
                  std::uint64_t seed, bool first) {
  attention_options o;
  o.trials = 2;
  o.input_second_moment = 1.5;
  const attention_report r = compare_attention(block, batch, stream::root(seed), o);
  const stream t = stream::root(seed).indexed(0);  // draw 0, as compare_attention draws it
  const realized_attention net = draw_attention(block, t);
  Eigen::MatrixXd x(static_cast<Eigen::Index>(block.width()), static_cast<Eigen::Index>(block.length() * batch));
  fill(view_of(x), dist::normal{0.0, std::sqrt(1.5)}, t.named("input"));
  Eigen::MatrixXd g(x.rows(), x.cols());
  fill(view_of(g), dist::normal{0.0, 1.0}, t.named("output_gradient"));
  const std::string stem = dir + "/" + name;
  for (std::size_t i = 0; i < 4; ++i) save_npy(stem + "." + projection_names()[i] + "_weight.npy", net.weight[i]);
  save_npy(stem + ".input.npy", x);
  save_npy(stem + ".output_gradient.npy", g);
  const attention_moments& m = r.draws[0];
  std::printf("%s{\"name\": \"%s\", \"heads\": %llu, \"length\": %llu, \"variances\": [%.17g, %.17g, %.17g, %.17g], "
              "\"input\": %.17g, \"query\": %.17g, \"key\": %.17g, \"value\": %.17g, \"score\": %.17g, "
              "\"concentration\": %.17g, \"largest_weight\": %.17g, \"mix\": %.17g, \"output\": %.17g, "
              "\"token_norm\": %.17g, \"pair_norm\": %.17g, \"mixed_norm\": %.17g, \"mix_norm\": %.17g, "
              "\"output_gradient\": %.17g, \"mix_gradient\": %.17g, \"softmax_gradient\": %.17g, "
              "\"score_gradient\": %.17g, \"query_gradient\": %.17g, \"key_gradient\": %.17g, "
              "\"value_gradient\": %.17g, \"input_gradient\": %.17g, \"gradient_norm\": %.17g, "
              "\"gradient_pair_norm\": %.17g, \"mixed_gradient_norm\": %.17g}",
              first ? "[" : ",\n", name.c_str(), static_cast<unsigned long long>(block.heads()),
              static_cast<unsigned long long>(block.length()), block.weight_variance(0), block.weight_variance(1),
              block.weight_variance(2), block.weight_variance(3), m.input, m.query, m.key, m.value, m.score,
              m.concentration, m.largest_weight, m.mix, m.output, m.token_norm, m.pair_norm, m.mixed_norm, m.mix_norm,
              m.output_gradient, m.mix_gradient, m.softmax_gradient, m.score_gradient, m.query_gradient,
              m.key_gradient, m.value_gradient, m.input_gradient, m.gradient_norm, m.gradient_pair_norm,
              m.mixed_gradient_norm);
}
}  // namespace

int main(int argc, char** argv) {
  return kindling_test::export_to_directory(argc, argv, [](const std::string& dir) {
    export_block(dir, "one_head", attention_block(24, 1, 10, glorot_uniform{}, lecun_normal{}), 6, 7, true);
    export_block(dir, "four_heads", attention_block(32, 4, 12, lecun_normal{}, glorot_normal{}), 5, 8, false);
    // Gain 3: a saturated softmax, where the subtraction of the row maximum matters.
    export_block(dir, "saturated", attention_block(32, 2, 12, glorot_uniform{3.0}, glorot_uniform{}), 5, 9, false);
    std::printf("]\n");
  });
}
