// Tests of examples/tool/spec.hpp: the JSON network spec of `kindling plan`.
#include <doctest/doctest.h>

#include <cmath>
#include <stdexcept>
#include <string>

#include "../../examples/tool/spec.hpp"

using namespace kindling;

namespace {

std::string message_of(const std::string& text) {
  try {
    parse_network_spec(text, "'net.json'");
  } catch (const std::exception& e) {
    return e.what();
  }
  return "";
}

std::string with_layer(const std::string& layer) {
  return R"({"input": {"width": 8}, "layers": [)" + layer + "]}";
}

}  // namespace

TEST_CASE("a spec gives the stack it describes, with each layer's fans and weight variance") {
  const network_spec spec = parse_network_spec(R"({
    "name": "pump",
    "input": {"width": 64, "variance": 2.0},
    "layers": [
      {"width": 256, "activation": "relu", "scheme": "he-normal", "label": "first"},
      {"width": 128, "activation": "tanh", "scheme": "glorot-uniform", "gain": 1.5, "bias_variance": 0.05},
      {"width": 32, "activation": "leaky_relu", "slope": 0.2, "scheme": "he-uniform"},
      {"width": 16, "activation": "selu", "scheme": "lecun-normal", "gain": 2},
      {"width": 16, "activation": "identity", "scheme": "normal", "std": 0.1},
      {"width": 8, "activation": "tanh", "scheme": "orthogonal", "gain": 1.2}
    ]})");
  CHECK(spec.name == "pump");
  const layer_stack s = build_stack(spec);
  REQUIRE(s.depth() == 6);
  CHECK(s.input_width() == 64);
  CHECK(s.input_second_moment() == 2.0);
  CHECK(s[0].label == "first");
  CHECK(s[0].fans.fan_in == 64);
  // He et al. 2015: Var W = 2 / fan_in
  CHECK(s[0].weight_variance == doctest::Approx(2.0 / 64));
  // Glorot & Bengio 2010 eq. 16 with gain g: g^2 * 2 / (fan_in + fan_out)
  CHECK(s[1].weight_variance == doctest::Approx(1.5 * 1.5 * 2.0 / (256 + 128)));
  CHECK(s[1].bias_variance == 0.05);
  // He et al. 2015 eq. 14 with the leaky slope a: 2 / ((1 + a^2) fan_in)
  CHECK(s[2].weight_variance == doctest::Approx(2.0 / ((1 + 0.04) * 128)));
  // a gain on LeCun: gain^2 / fan_in
  CHECK(s[3].weight_variance == doctest::Approx(4.0 / 32));
  CHECK(s[4].weight_variance == doctest::Approx(0.01));
  // orthogonal: gain^2 / max(fan_in, fan_out)
  CHECK(s[5].weight_variance == doctest::Approx(1.44 / 16));
}

TEST_CASE("a spec with a mistake is refused with the key's path, its value and what was expected") {
  struct bad_case {
    const char* what;
    std::string text;
    const char* expected;
  };
  const std::vector<bad_case> cases{
      {"not JSON", "{\"input\": ", "not valid JSON"},
      {"not an object", "[1, 2]", "an object"},
      {"unknown top key", R"({"input": {"width": 8}, "layers": [], "extra": 1})", "unknown key '(top).extra'"},
      {"no input", R"({"layers": []})", "no key 'input'"},
      {"no layers", R"({"input": {"width": 8}})", "no key 'layers'"},
      {"empty layers", R"({"input": {"width": 8}, "layers": []})", "a non-empty array"},
      {"input width negative", R"({"input": {"width": -8}, "layers": [{}]})", "'input.width' = -8, expected a positive integer"},
      {"input width fractional", R"({"input": {"width": 8.5}, "layers": [{}]})", "'input.width' = 8.5"},
      {"input width a string", R"({"input": {"width": "8"}, "layers": [{}]})", "'input.width' = \"8\""},
      {"input variance zero", R"({"input": {"width": 8, "variance": 0}, "layers": [{}]})", "'input.variance' = 0"},
      {"unknown input key", R"({"input": {"width": 8, "mean": 0}, "layers": [{}]})", "unknown key 'input.mean'"},
      {"layer width zero", with_layer(R"({"width": 0, "activation": "relu", "scheme": "he-normal"})"), "'layers[0].width' = 0"},
      {"layer width negative", with_layer(R"({"width": -3, "activation": "relu", "scheme": "he-normal"})"), "'layers[0].width' = -3"},
      {"misspelt key", with_layer(R"({"widht": 3, "activation": "relu", "scheme": "he-normal"})"), "unknown key 'layers[0].widht'"},
      {"no activation", with_layer(R"({"width": 3, "scheme": "he-normal"})"), "'layers[0]' has no key 'activation'"},
      {"unknown activation", with_layer(R"({"width": 3, "activation": "swish", "scheme": "he-normal"})"), "'layers[0].activation' = \"swish\", expected one of identity"},
      {"unknown scheme", with_layer(R"({"width": 3, "activation": "relu", "scheme": "xavier"})"), "'layers[0].scheme' = \"xavier\", expected one of glorot-uniform"},
      {"gain negative", with_layer(R"({"width": 3, "activation": "relu", "scheme": "he-normal", "gain": -1})"), "'layers[0].gain' = -1"},
      {"gain not a number", with_layer(R"({"width": 3, "activation": "relu", "scheme": "he-normal", "gain": "big"})"), "expected a number"},
      {"bias variance negative", with_layer(R"({"width": 3, "activation": "relu", "scheme": "he-normal", "bias_variance": -0.1})"), "'layers[0].bias_variance' = -0.1"},
      {"slope without leaky_relu", with_layer(R"({"width": 3, "activation": "relu", "scheme": "he-normal", "slope": 0.1})"), "unless the activation is leaky_relu"},
      {"normal without std", with_layer(R"({"width": 3, "activation": "relu", "scheme": "normal"})"), "no key 'std'"},
      {"std on he", with_layer(R"({"width": 3, "activation": "relu", "scheme": "he-normal", "std": 1})"), "no 'std' unless"},
      {"gain on normal", with_layer(R"({"width": 3, "activation": "relu", "scheme": "normal", "std": 1, "gain": 2})"), "no 'gain' with scheme 'normal'"},
      {"repeated key", with_layer(R"({"width": 3, "width": 4, "activation": "relu", "scheme": "he-normal"})"), "'width' appears twice"},
      {"layer not an object", with_layer("3"), "'layers[0]' = 3, expected an object"},
  };
  for (const bad_case& c : cases) {
    CAPTURE(c.what);
    const std::string m = message_of(c.text);
    CHECK_MESSAGE(m.find("'net.json'") != std::string::npos, "expected the message to name the file: ", m);
    CHECK_MESSAGE(m.find(c.expected) != std::string::npos, "expected '", c.expected, "' in: ", m);
  }
  SUBCASE("numbers out of range are std::domain_error, the rest std::invalid_argument") {
    CHECK_THROWS_AS(parse_network_spec(R"({"input": {"width": 8, "variance": -1}, "layers": [{}]})"), std::domain_error);
    CHECK_THROWS_AS(parse_network_spec(R"({"input": {"width": 8}, "layers": [{"width": 2}]})"), std::invalid_argument);
  }
  SUBCASE("a missing file is named") {
    CHECK_THROWS_WITH_AS(read_network_spec("no_such_spec.json"), doctest::Contains("'no_such_spec.json'"),
                         std::invalid_argument);
  }
}

TEST_CASE("a number beyond double's range is bad input, not an escaping parser error (fuzz finding)") {
  // tests/fuzz/regressions/spec/number_overflow_406.json: nlohmann's out_of_range 406
  // escaped parse_network_spec before the fix.
  const std::string text =
      R"({"input": {"width": 3}, "layers": [{"width": 1e400, "activation": "relu", "scheme": "he-normal"}]})";
  CHECK_THROWS_AS(kindling::parse_network_spec(text), std::invalid_argument);
}
