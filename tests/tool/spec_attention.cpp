// Tests of the attention key of examples/tool/spec.hpp: a block read from a spec and
// built by build_sections (its width from the layer below, its length from "length" or
// the 1-D map below), and the refusals, each under its key.
//
// Sources: Glorot & Bengio 2010 (Var W = 2 / (fan_in + fan_out)); LeCun et al. 1998
// (Var W = 1 / fan_in), for the projections' variances; the attention block itself is
// propagate/attention.hpp's (tests/propagate/attention.cpp).
#include <doctest/doctest.h>

#include <stdexcept>
#include <string>
#include <vector>

#include "../../examples/tool/spec.hpp"

#include "../support/errors.hpp"

using namespace kindling;

TEST_CASE("an attention block in a spec: its width from the layer below, its length given or from the 1-D map") {
  const network_sections f = build_sections(parse_network_spec(R"({"input": {"width": 8}, "layers": [
      {"width": 32, "activation": "identity", "scheme": "lecun-normal"},
      {"attention": {"heads": 4, "length": 10, "output_scheme": "lecun-normal"}, "label": "attend"}]})"));
  REQUIRE(f.attention.size() == 1);
  const attention_block& a = f.attention[0];
  CHECK(a.width() == 32);
  CHECK(a.heads() == 4);
  CHECK(a.head_width() == 8);
  CHECK(a.length() == 10);
  CHECK(a.label() == "attend");
  CHECK(a.scheme(0) == "glorot-uniform");
  CHECK(a.scheme(3) == "lecun-normal");
  CHECK(a.weight_variance(0) == doctest::Approx(2.0 / 64.0).epsilon(1e-14));
  CHECK(a.weight_variance(3) == doctest::Approx(1.0 / 32.0).epsilon(1e-14));
  CHECK(f.attention_paths[0] == "layers[1]");
  const network_sections m = build_sections(parse_network_spec(
      R"({"input": {"width": 6, "extent": [12]}, "layers": [{"attention": {"heads": 2, "width": 6, "scheme": "he-normal"}}]})"));
  REQUIRE(m.attention.size() == 1);
  CHECK(m.attention[0].length() == 12);
  CHECK(m.attention[0].width() == 6);
  CHECK(m.attention[0].label() == "attention1");
}

TEST_CASE("a spec is cut at its attention blocks: the stack above reads the block's tokens") {
  // On a 1-D map: the stack above is the same map (channels = the model width, its
  // length the tokens), fed the second moment given for the cut.
  const network_spec belt = parse_network_spec(R"({"input": {"width": 3, "extent": [20]}, "layers": [
      {"width": 8, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3], "padding": "same"}},
      {"attention": {"heads": 2}, "label": "attend"},
      {"width": 8, "activation": "relu", "scheme": "he-normal", "conv": {"kernel": [3], "padding": "same"}},
      {"recurrent": {"cell": "gru", "hidden": 6}},
      {"width": 2, "activation": "identity", "scheme": "glorot-uniform", "label": "head"}]})");
  const network_sections s = build_sections(belt, {0.3, 0.7});
  REQUIRE(s.cuts.size() == 2);
  REQUIRE(s.stacks.size() == 3);
  CHECK(s.cuts[0].attention);
  CHECK(s.cuts[0].index == 0);
  CHECK_FALSE(s.cuts[1].attention);
  CHECK(s.cuts[1].index == 0);
  CHECK(s.attention[0].width() == 8);
  CHECK(s.attention[0].length() == 20);
  CHECK(s.stacks[0].depth() == 1);
  CHECK(s.stacks[1].input_width() == 8);
  CHECK(s.stacks[1].input_extent() == std::vector<std::uint64_t>{20});
  CHECK(s.stacks[1].input_second_moment() == 0.3);
  CHECK(s.cells[0].input_width() == 8);  // the map above the block
  CHECK(s.cells[0].steps() == 20);
  CHECK(s.stacks[2].input_second_moment() == 0.7);
  CHECK(s.stacks[2][0].label == "head");
  // On features: the layers above read `width` features a token; 1 when no moment is given.
  const network_sections f = build_sections(parse_network_spec(R"({"input": {"width": 8}, "layers": [
      {"attention": {"heads": 2, "length": 5}},
      {"width": 3, "activation": "identity", "scheme": "lecun-normal"}]})"));
  REQUIRE(f.stacks.size() == 2);
  CHECK(f.stacks[0].empty());
  CHECK(f.stacks[1].input_width() == 8);
  CHECK(f.stacks[1].input_extent().empty());
  CHECK(f.stacks[1].input_second_moment() == 1.0);
  CHECK(f.stacks[1][0].fans.fan_in == 8);
}

TEST_CASE("a spec whose attention block cannot be built is refused under its key, naming the value") {
  const std::string features = R"({"input": {"width": 12}, "layers": [)";
  const std::string map = R"({"input": {"width": 12, "extent": [6]}, "layers": [)";
  struct bad {
    const char* what;
    std::string text;
    const char* expected;
  };
  const std::vector<bad> cases{
      {"heads not dividing the width", features + R"({"attention": {"heads": 5, "length": 4}}]})",
       "'layers[0].attention.heads' = 5, expected a divisor of the model width 12"},
      {"zero heads", features + R"({"attention": {"heads": 0, "length": 4}}]})",
       "'layers[0].attention.heads' = 0, expected a positive integer"},
      {"zero length", features + R"({"attention": {"heads": 2, "length": 0}}]})",
       "'layers[0].attention.length' = 0, expected a positive integer"},
      {"zero width", features + R"({"attention": {"heads": 2, "length": 4, "width": 0}}]})",
       "'layers[0].attention.width' = 0, expected a positive integer"},
      {"width against the layer below", features + R"({"attention": {"heads": 2, "length": 4, "width": 16}}]})",
       "'layers[0].attention.width' = 16, expected the width of the layer below, 12"},
      {"no length on features", features + R"({"attention": {"heads": 2}}]})",
       "'layers[0].attention' has no key 'length'"},
      {"length against the map", map + R"({"attention": {"heads": 2, "length": 5}}]})",
       "'layers[0].attention.length' = 5, expected the length of the 1-D map below, 6"},
      {"no heads", features + R"({"attention": {"length": 4}}]})", "'layers[0].attention' has no key 'heads'"},
      {"orthogonal projections", features + R"({"attention": {"heads": 2, "length": 4, "scheme": "orthogonal"}}]})",
       "'layers[0].attention.scheme' = \"orthogonal\", expected one of glorot-uniform"},
      {"unknown key", features + R"({"attention": {"heads": 2, "length": 4, "dropout": 0.1}}]})",
       "unknown key 'layers[0].attention.dropout'"},
      {"inside a residual branch", features + R"({"residual": {"layers": [{"attention": {"heads": 2, "length": 4}}]}}]})",
       "'layers[0].residual.layers[0].attention' is refused: an attention block inside a residual branch"},
      {"a 2-D map below", R"({"input": {"width": 4, "extent": [6, 6]}, "layers": [{"attention": {"heads": 2}}]})",
       "'layers[0]' is refused: the map below has extent [6, 6], expected a 1-D map"},
  };
  for (const bad& c : cases) {
    CAPTURE(c.what);
    const std::string m =
        kindling_test::message_of<std::invalid_argument>([&] { parse_network_spec(c.text, "'belt.json'"); });
    CHECK_MESSAGE(m.find("kindling network spec 'belt.json': ") == 0, "expected the message to name the file: ", m);
    CHECK_MESSAGE(m.find(c.expected) != std::string::npos, "expected '", c.expected, "' in: ", m);
  }
}
