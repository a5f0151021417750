// Exports draw 0 of several convolution stacks for tests/propagate/check_convolution.py:
// the drawn weights and biases, the input batch and the output gradient as .npy files in
// the directory given, and on stdout one JSON object a stack with its layers' geometry
// and the second moments compare_propagation measured in that draw.
// Not a doctest file: reference/ is outside the glob of tests/CMakeLists.txt, so this
// program keeps its own main (built by kindling_reference_check).
#include <cstdio>
#include <string>
#include <vector>

#include "kindling/propagate/measure.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include "export.hpp"

using namespace kindling;
using kindling_test::save_npy;

namespace {
std::string list(const std::vector<std::uint64_t>& v) {
  std::string s = "[";
  for (std::size_t i = 0; i < v.size(); ++i) s += (i ? ", " : "") + std::to_string(v[i]);
  return s + "]";
}

void export_stack(const std::string& dir, const std::string& name, const layer_stack& s, std::uint64_t batch,
                  std::uint64_t seed, bool first) {
  measure_options o;
  o.trials = 2;
  const propagation_report r = compare_propagation(s, batch, stream::root(seed), o);
  const stream t = stream::root(seed).indexed(0);  // draw 0, as compare_propagation draws it
  const realized_stack net = realize(s, t);
  Eigen::MatrixXd x(static_cast<Eigen::Index>(s.input_units()), static_cast<Eigen::Index>(batch));
  Eigen::MatrixXd g(static_cast<Eigen::Index>(s.layers().back().units()), static_cast<Eigen::Index>(batch));
  fill(view_of(x), dist::normal{0.0, std::sqrt(s.input_second_moment())}, t.named("input"));
  fill(view_of(g), dist::normal{0.0, 1.0}, t.named("output_gradient"));
  const std::string stem = dir + "/" + name;
  save_npy(stem + ".input.npy", {static_cast<std::uint64_t>(x.rows()), batch}, x);
  save_npy(stem + ".output_gradient.npy", {static_cast<std::uint64_t>(g.rows()), batch}, g);
  std::printf("%s{\"name\": \"%s\", \"channels\": %llu, \"extent\": %s, \"layers\": [", first ? "[" : ",\n",
              name.c_str(), static_cast<unsigned long long>(s.input_width()), list(s.input_extent()).c_str());
  for (std::size_t l = 0; l < s.depth(); ++l) {
    const stack_layer& L = s[l];
    std::vector<std::uint64_t> shape{L.width, static_cast<std::uint64_t>(net.weights[l].cols())};
    if (L.map) {
      shape = {L.map->out_channels(), L.map->in_channels() / L.map->groups()};
      shape.insert(shape.end(), L.map->kernel().begin(), L.map->kernel().end());
    }
    save_npy(stem + "." + std::to_string(l) + ".weight.npy", shape, net.weights[l]);
    save_npy(stem + "." + std::to_string(l) + ".bias.npy", {L.width, 1}, net.biases[l]);
    std::printf("%s{\"activation\": \"%s\", \"measured_forward\": %.17g, \"measured_backward\": %.17g", l ? ", " : "",
                L.act.name().c_str(), r.layers[l].preactivation.draws[0], r.layers[l].gradient.draws[0]);
    if (L.map) {
      std::printf(", \"groups\": %llu, \"stride\": %s, \"padding\": %s, \"dilation\": %s",
                  static_cast<unsigned long long>(L.map->groups()), list(L.map->stride()).c_str(),
                  list(L.map->padding()).c_str(), list(L.map->dilation()).c_str());
    }
    std::printf("}");
  }
  std::printf("]}");
}
}  // namespace

int main(int argc, char** argv) {
  return kindling_test::export_to_directory(argc, argv, [](const std::string& dir) {
    const convolution_geometry same{{}, same_padding({3, 3}), {}};
    layer_stack a = layer_stack::feature_maps(3, {8, 8});
    a.add_convolution(convolution(3, 16, {3, 3}), same, activation::relu(), he_normal{})
        .add_convolution(convolution(16, 16, {3, 3}), same, activation::relu(), he_normal{});
    layer_stack b = layer_stack::feature_maps(4, {11, 9});
    b.add_convolution(convolution(4, 12, {3, 3}), activation::tanh(), glorot_normal{5.0 / 3.0}, 0.05)
        .add_convolution(convolution(12, 12, {3, 3}), {{2, 2}, {1, 1}, {}}, activation::tanh(), glorot_normal{5.0 / 3.0},
                         0.05);
    layer_stack c = layer_stack::feature_maps(8, {6, 7});
    c.add_convolution(convolution(8, 16, {3, 3}, 4), same, activation::relu(), he_normal{})
        .add_convolution(convolution::depthwise(16, 1, {3, 3}), {{2, 1}, {1, 1}, {1, 2}}, activation::relu(), he_normal{});
    layer_stack d = layer_stack::feature_maps(2, {32});
    d.add_convolution(convolution(2, 16, {5}), {{}, same_padding({5}), {}}, activation::relu(), he_normal{})
        .add_convolution(convolution(16, 16, {3}), {{2}, {2}, {2}}, activation::relu(), he_normal{})
        .add_dense(8, activation::identity(), lecun_normal{}, 0.1);
    export_stack(dir, "same2d", a, 40, 1, true);
    export_stack(dir, "stride2d", b, 40, 2, false);
    export_stack(dir, "groups2d", c, 40, 3, false);
    export_stack(dir, "dilated1d", d, 40, 4, false);
    std::printf("]\n");
  });
}
