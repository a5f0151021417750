// Tests of the convolution, residual and recurrent keys of examples/tool/spec.hpp: the
// stack a spec of feature maps, convolutions and residual blocks gives, a spec cut at its
// recurrent cells (build_sections), and the refusals that only the stack can decide
// (geometry, groups, branch widths, a cell's steps), each under its key.
//
// Sources: He et al., ICCV 2015 (Var W = 2 / fan_in, fan_in = in / groups x kernel);
// Dumoulin & Visin 2016 (output extents); Zhang et al., ICLR 2019 (Fixup); Glorot &
// Bengio 2010 (Var W = 2 / (fan_in + fan_out) for one gate block); Saxe et al. 2014
// (orthogonal: every entry of an n x n block has variance gain^2 / n).
#include <doctest/doctest.h>

#include <stdexcept>
#include <string>
#include <vector>

#include "../../examples/tool/spec.hpp"

#include "../support/errors.hpp"

using namespace kindling;

namespace {
std::string message_of(const std::string& text) {
  return kindling_test::message_of<std::invalid_argument>([&] { parse_network_spec(text, "'belt.json'"); });
}

struct bad_spec {
  const char* what;
  std::string text;
  const char* expected;
};

// Each spec is refused, the message naming the file and containing `expected`.
void check_refused(const std::vector<bad_spec>& cases) {
  for (const bad_spec& c : cases) {
    CAPTURE(c.what);
    const std::string m = message_of(c.text);
    CHECK_MESSAGE(m.find("kindling network spec 'belt.json': ") == 0, "expected the message to name the file: ", m);
    CHECK_MESSAGE(m.find(c.expected) != std::string::npos, "expected '", c.expected, "' in: ", m);
  }
}
}  // namespace

TEST_CASE("a spec of 1-D convolutions, a residual block and a dense head gives the stack it describes") {
  const network_spec spec = parse_network_spec(R"({
    "name": "belt fault detector",
    "input": {"width": 3, "extent": [64]},
    "layers": [
      {"width": 16, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [5], "padding": "same"}},
      {"width": 32, "activation": "relu", "scheme": "he-normal",
       "conv": {"kernel": [3], "stride": [2], "padding": [1], "groups": 4}},
      {"residual": {"layers": [
          {"width": 32, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3], "padding": "same", "dilation": [1]}},
          {"width": 32, "activation": "identity", "scheme": "he-normal", "conv": {"kernel": [3], "padding": "same"}}],
        "scaling": "fixup", "blocks": 4}, "label": "block"},
      {"width": 4, "activation": "identity", "scheme": "glorot-uniform", "label": "head"}
    ]})");
  const layer_stack s = build_stack(spec);
  REQUIRE(s.depth() == 6);
  CHECK(s.input_extent() == std::vector<std::uint64_t>{64});
  CHECK(s[0].fans.fan_in == 3 * 5);
  CHECK(s[0].map->out_extent() == std::vector<std::uint64_t>{64});
  CHECK(s[1].fans.fan_in == 12);  // in 16 / groups 4 x kernel 3
  CHECK(s[1].map->out_extent() == std::vector<std::uint64_t>{32});  // (64 + 2 - 3) / 2 + 1
  CHECK(s[2].label == "block.layer1");
  // Fixup with m = 2, L = 4: the first branch layer's He variance times 4^(-1) ...
  CHECK(s[2].weight_variance == doctest::Approx(2.0 / (32 * 3) / 4));
  CHECK(s[3].weight_variance == 0.0);  // ... and the last at zero
  CHECK(s[4].residual);
  CHECK(s[5].fans.fan_in == 32 * 32);  // the flattened map
  const auto p = predict(s);
  CHECK(p[4].preactivation_variance == doctest::Approx(p[1].activation_moment).epsilon(1e-12));
}

TEST_CASE("a spec whose convolution or residual block cannot be built is refused under its key") {
  struct bad_case {
    const char* what;
    std::string layers;
    const char* expected;
  };
  const std::string input = R"({"input": {"width": 4, "extent": [6]}, "layers": [)";
  const std::vector<bad_case> cases{
      {"kernel larger than the padded input", R"({"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [9], "padding": [1]}})",
       "'layers[0].conv.kernel' is refused: kindling::convolution_map: argument 'conv.kernel' = [9], spanning 9 positions on axis 0 (dilation 1), expected a kernel that fits the padded input, 8"},
      {"groups not dividing the channels", R"({"width": 6, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3], "groups": 4}})",
       "'layers[0].conv.groups' is refused"},
      {"branch width not matching its skip", R"({"residual": {"layers": [{"width": 8, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [1]}}]}})",
       "'layers[0].residual.layers' is refused: kindling::layer_stack::add_residual: argument 'branch' = a branch ending in 8 channels"},
      {"scaling without blocks", R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [1]}}], "scaling": "fixup"}})",
       "'layers[0].residual' has scaling 'fixup' but no key 'blocks'"},
      {"unknown scaling", R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}], "scaling": "half"}})",
       "'layers[0].residual.scaling' = \"half\", expected one of none, inverse-sqrt, fixup, fixup-keep-last, normalization-free"},
      {"alpha with another scaling", R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}], "scaling": "fixup", "blocks": 2, "alpha": 0.2}})",
       "'layers[0].residual.alpha' is given with scaling 'fixup', expected it only with scaling 'normalization-free'"},
      {"blocks with normalization-free scaling", R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}], "scaling": "normalization-free", "blocks": 4}})",
       "'layers[0].residual.blocks' is given with scaling 'normalization-free', expected it only with scaling inverse-sqrt, fixup or fixup-keep-last"},
      {"blocks without a scaling", R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}], "blocks": 4}})",
       "'layers[0].residual.blocks' is given with scaling 'none', expected it only with scaling inverse-sqrt, fixup or fixup-keep-last"},
      {"residual with a width", R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}]}, "width": 4})",
       "unknown key 'layers[0].width'"},
      {"kernel of the wrong rank", R"({"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3, 3]}})",
       "'layers[0].conv.kernel' is refused"},
      {"stride of the wrong length", R"({"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3], "stride": [1, 1]}})",
       "'layers[0].conv.stride' = [1,1], expected an array of 1 positive integers (one per kernel axis)"},
      {"zero kernel", R"({"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [0]}})",
       "'layers[0].conv.kernel' = [0], expected an array of 1 to 3 positive integers"},
      {"same padding with an even kernel", R"({"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [2], "padding": "same"}})",
       "'layers[0].conv.padding' = \"same\", expected odd kernel sizes"},
      {"unknown conv key", R"({"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3], "pad": 1}})",
       "unknown key 'layers[0].conv.pad'"},
      {"a bad layer inside a branch", R"({"residual": {"layers": [{"width": 0, "activation": "relu", "scheme": "he-normal"}]}})",
       "'layers[0].residual.layers[0].width' = 0"},
  };
  std::vector<bad_spec> whole;
  for (const bad_case& c : cases) whole.push_back({c.what, input + c.layers + "]}", c.expected});
  check_refused(whole);
  CHECK(kindling_test::message_of<std::domain_error>([&] {
          parse_network_spec(input + R"({"residual": {"layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}], )"
                                     R"("scaling": "normalization-free", "alpha": -0.5}}]})", "'belt.json'");
        }).find("'layers[0].residual.alpha' = -0.5, expected a finite number >= 0") != std::string::npos);
  CHECK(message_of(R"({"input": {"width": 4}, "layers": [{"width": 4, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3]}}]})")
            .find("'layers[0].conv' is refused: a convolution needs a feature map below it") != std::string::npos);
  CHECK(message_of(R"({"input": {"width": 4, "extent": [0]}, "layers": [{"width": 4, "activation": "relu", "scheme": "he-normal"}]})")
            .find("'input.extent' = [0], expected an array of 1 to 3 positive integers") != std::string::npos);
}

// Normalizer-free blocks (Brock, De & Smith, ICLR 2021, from memory): the branch input
// divided by beta, the stream's predicted standard deviation below the block (folded into
// the branch's first weights: He's 2 / fan_in over beta^2), the branch output times alpha.
// Over a unit-variance input, after a first block of a He ReLU layer and a LeCun linear
// layer, the stream has E[x^2] = 1 + alpha^2 (the branch preserves the unit variance it reads).
TEST_CASE("a spec's normalization-free residual blocks divide by the stream's predicted deviation") {
  const network_spec spec = parse_network_spec(R"({
    "input": {"width": 16},
    "layers": [
      {"residual": {"layers": [{"width": 16, "activation": "relu", "scheme": "he-normal"},
                               {"width": 16, "activation": "identity", "scheme": "lecun-normal"}],
                    "scaling": "normalization-free", "alpha": 0.5}},
      {"residual": {"layers": [{"width": 16, "activation": "relu", "scheme": "he-normal"},
                               {"width": 16, "activation": "identity", "scheme": "lecun-normal"}],
                    "scaling": "normalization-free"}}
    ]})");
  const layer_stack s = build_stack(spec);
  REQUIRE(s.depth() == 6);
  CHECK(s[0].weight_variance == doctest::Approx(2.0 / 16).epsilon(1e-12));           // beta = 1
  CHECK(s[2].branch_scale == 0.5);
  CHECK(s[3].weight_variance == doctest::Approx(2.0 / 16 / 1.25).epsilon(1e-12));    // beta^2 = 1 + 0.5^2
  CHECK(s[5].branch_scale == 0.2);                                                    // the default alpha
  const auto p = predict(s);
  CHECK(p[5].preactivation_variance == doctest::Approx(1.25 + 0.04).epsilon(1e-12));
}

TEST_CASE("a spec with 1-D convolutions, a GRU and a dense head is cut at the cell") {
  const network_spec spec = parse_network_spec(R"({
    "input": {"width": 3, "extent": [40]},
    "layers": [
      {"width": 16, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [5], "padding": "same"}},
      {"recurrent": {"cell": "gru", "hidden": 32, "forget_bias": 0.5, "recurrent_gain": 1.5}, "label": "memory"},
      {"width": 4, "activation": "identity", "scheme": "glorot-uniform", "label": "head"}
    ]})");
  CHECK_THROWS_AS(build_stack(spec), std::invalid_argument);
  const network_sections s = build_sections(spec, {0.25});
  REQUIRE(s.cells.size() == 1);
  REQUIRE(s.stacks.size() == 2);
  const recurrent_cell& c = s.cells[0];
  CHECK(c.kind() == cell_kind::gru);
  CHECK(c.input_width() == 16);  // the channels of the map below
  CHECK(c.steps() == 40);        // its length
  CHECK(c.hidden() == 32);
  CHECK(c.forget_bias() == 0.5);
  CHECK(c.label() == "memory");
  CHECK(c.input_weight_variance() == doctest::Approx(2.0 / (16 + 32)).epsilon(1e-14));  // Glorot, one block
  CHECK(c.recurrent_weight_variance() == doctest::Approx(1.5 * 1.5 / 32).epsilon(1e-14));  // orthogonal, gain 1.5
  CHECK(s.stacks[0].depth() == 1);
  CHECK(s.stacks[1].input_width() == 32);
  CHECK(s.stacks[1].input_second_moment() == 0.25);
  CHECK(s.stacks[1][0].label == "head");
  // On features, 'steps' is the sequence length; the defaults: forget bias 1, Glorot uniform input, orthogonal recurrent.
  const network_sections f = build_sections(parse_network_spec(
      R"({"input": {"width": 8}, "layers": [{"recurrent": {"cell": "lstm", "hidden": 4, "steps": 7}}]})"));
  CHECK(f.cells[0].steps() == 7);
  CHECK(f.cells[0].forget_bias() == 1.0);
  CHECK(f.cells[0].input_scheme() == "glorot-uniform");
  CHECK(f.cells[0].recurrent_scheme() == "orthogonal");
  CHECK(f.cells[0].label() == "cell1");
  CHECK(f.stacks[1].empty());
}

TEST_CASE("a spec whose recurrent cell cannot be built is refused under its key") {
  const std::string map = R"({"input": {"width": 4, "extent": [6]}, "layers": [)";
  const std::string features = R"({"input": {"width": 4}, "layers": [)";
  check_refused({
      {"zero steps", features + R"({"recurrent": {"cell": "lstm", "hidden": 8, "steps": 0}}]})",
       "'layers[0].recurrent.steps' = 0, expected a positive integer"},
      {"zero hidden", features + R"({"recurrent": {"cell": "gru", "hidden": 0, "steps": 5}}]})",
       "'layers[0].recurrent.hidden' = 0, expected a positive integer"},
      {"unknown cell", features + R"({"recurrent": {"cell": "elman", "hidden": 8, "steps": 5}}]})",
       "'layers[0].recurrent.cell' = \"elman\", expected one of lstm, gru"},
      {"no cell", features + R"({"recurrent": {"hidden": 8, "steps": 5}}]})", "'layers[0].recurrent' has no key 'cell'"},
      {"no steps on features", features + R"({"recurrent": {"cell": "gru", "hidden": 8}}]})",
       "'layers[0].recurrent' has no key 'steps'"},
      {"steps against the map", map + R"({"recurrent": {"cell": "gru", "hidden": 8, "steps": 5}}]})",
       "'layers[0].recurrent.steps' = 5, expected the length of the 1-D map below, 6"},
      {"a 2-D map below", R"({"input": {"width": 4, "extent": [6, 6]}, "layers": [{"recurrent": {"cell": "gru", "hidden": 8}}]})",
       "'layers[0]' is refused: the map below has extent [6, 6], expected a 1-D map"},
      {"unknown scheme", features + R"({"recurrent": {"cell": "gru", "hidden": 8, "steps": 5, "recurrent_scheme": "normal"}}]})",
       "'layers[0].recurrent.recurrent_scheme' = \"normal\", expected one of glorot-uniform"},
      {"unknown key", features + R"({"recurrent": {"cell": "gru", "hidden": 8, "steps": 5, "bias": 1}}]})",
       "unknown key 'layers[0].recurrent.bias'"},
      {"a width beside the cell", features + R"({"recurrent": {"cell": "gru", "hidden": 8, "steps": 5}, "width": 3}]})",
       "unknown key 'layers[0].width'"},
      {"a forget bias that is not a number", features + R"({"recurrent": {"cell": "gru", "hidden": 8, "steps": 5, "forget_bias": "x"}}]})",
       "'layers[0].recurrent.forget_bias' = \"x\", expected a number"},
      {"a cell inside a residual branch", features + R"({"residual": {"layers": [{"recurrent": {"cell": "gru", "hidden": 4, "steps": 5}}]}}]})",
       "'layers[0].residual.layers[0].recurrent' is refused: a recurrent cell inside a residual branch"},
      {"a bad layer above the cell", features + R"({"recurrent": {"cell": "gru", "hidden": 8, "steps": 5}}, {"width": 0, "activation": "relu", "scheme": "he-normal"}]})",
       "'layers[1].width' = 0"},
  });
}
