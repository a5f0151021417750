// Tests of kindling/model/rules.hpp (and the "rules" of a JSON plan, io/manifest.hpp):
// the pattern syntax, precedence (the most specific pattern wins), ties, a parameter no
// rule matches, a pattern that matches nothing, layers made from kind + shape, and a
// plan written with rules equal to the same plan written out in full.
#include <doctest/doctest.h>

#include <fstream>
#include <sstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/plan_error.hpp"
#include "kindling/io/manifest.hpp"
#include "kindling/model/rules.hpp"

using namespace kindling;
using kindling_test::plan_error;

namespace {

bool has(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

std::string rules_error(const std::vector<parameter_request>& requests, const std::vector<plan_rule>& rules) {
  return kindling_test::message_of<std::invalid_argument>([&] { (void)apply_rules(requests, rules); });
}

plan_rule rule(const std::string& pattern, const char* scheme, std::optional<layer_kind> kind = std::nullopt) {
  plan_rule r;
  r.pattern = pattern;
  if (scheme != nullptr) r.scheme = parse_scheme(scheme);
  if (kind) r.layer = layer_template{*kind};
  return r;
}

}  // namespace

TEST_CASE("name patterns: '*' stays within a segment, '**' crosses segments, the rest is literal") {
  const name_pattern one("front.*.weight");
  CHECK(one.matches("front.conv1.weight"));
  CHECK(one.matches("front..weight"));  // '*' may be empty
  CHECK_FALSE(one.matches("front.a.b.weight"));
  CHECK_FALSE(one.matches("front.conv1.weight2"));
  CHECK_FALSE(one.matches("xfront.conv1.weight"));
  const name_pattern two("**.bias");
  CHECK(two.matches("gru.bias"));
  CHECK(two.matches("a.b.c.bias"));
  CHECK_FALSE(two.matches("bias"));
  CHECK_FALSE(two.matches("gru.bias.x"));
  const name_pattern mid("encoder.**.w_*");
  CHECK(mid.matches("encoder.layer3.attn.w_q"));
  CHECK(mid.matches("encoder..w_"));
  CHECK_FALSE(mid.matches("encoder.layer3.attn.w_q.t"));
  CHECK(name_pattern("**").matches("anything.at.all"));
  CHECK(name_pattern("*").matches("flat"));
  CHECK_FALSE(name_pattern("*").matches("not.flat"));
  CHECK(name_pattern("a*b*c").matches("aXbYc"));
  CHECK(name_pattern("a*b*c").matches("abbbc"));
  CHECK_FALSE(name_pattern("a*b*c").matches("ab.c"));
  CHECK(name_pattern("exact.name").matches("exact.name"));
  CHECK_FALSE(name_pattern("exact.name").matches("exact_name"));
  CHECK_THROWS_WITH_AS(name_pattern("a.***"), doctest::Contains("3 '*' in a row"), std::invalid_argument);
  CHECK_THROWS_AS(name_pattern(""), std::invalid_argument);
}

TEST_CASE("specificity: more literal characters, then fewer '**', then fewer '*'") {
  CHECK(name_pattern("gru.w_ih").compare_specificity(name_pattern("gru.w_ih*")) > 0);  // exact beats a '*' matching nothing
  CHECK(name_pattern("*.w_ih").compare_specificity(name_pattern("gru.*")) > 0);        // 5 literals against 4
  CHECK(name_pattern("a.*").compare_specificity(name_pattern("a.**")) > 0);            // a '*' beats a '**'
  CHECK(name_pattern("a*.b").compare_specificity(name_pattern("a.b**")) > 0);
  CHECK(name_pattern("a.*").compare_specificity(name_pattern("*.b")) == 0);
  CHECK(name_pattern("**.x.*").compare_specificity(name_pattern("**.x.**")) > 0);
}

TEST_CASE("apply_rules: the most specific rule gives each field, a parameter's own fields win") {
  std::vector<plan_rule> rules = {
      rule("**.weight", "glorot-uniform", layer_kind::dense),
      rule("head.weight", "lecun-normal"),  // exact: more specific than **.weight for the scheme only
      rule("**.bias", "zeros", layer_kind::bias),
      rule("gru.*", "orthogonal"),
  };
  plan_rule packed;
  packed.pattern = "gru.w_*";
  packed.layer = layer_template::packed_blocks(3, {"reset", "update", "new"});
  rules.push_back(packed);
  plan_rule half;
  half.pattern = "head.*";
  half.element = element_kind::f16;
  rules.push_back(half);
  std::vector<parameter_request> requests = {{"fc.weight", {8, 4}}, {"fc.bias", {8}}, {"gru.w_hh", {48, 16}},
                                             {"head.weight", {2, 16}}, {"head.bias", {2}}};
  requests[1].scheme = parse_scheme("constant(value=0.5)");  // its own scheme, whatever the rules say
  const model_plan plan = apply_rules(requests, rules);
  REQUIRE(plan.parameters.size() == 5);
  const model_parameter& fc = plan.parameters[0];
  CHECK(fc.scheme.text() == "glorot-uniform");
  CHECK(std::get<dense>(fc.layer).in_features() == 4);
  CHECK(std::get<dense>(fc.layer).out_features() == 8);
  CHECK(fc.element == element_kind::f32);
  CHECK(plan.parameters[1].scheme.text() == "constant(value=0.5)");
  const model_parameter& gru = plan.parameters[2];
  // layer: gru.w_* (6 literals) beats **.weight (no match anyway); scheme: gru.* is the only one
  CHECK(gru.scheme.text() == "orthogonal");
  REQUIRE(std::holds_alternative<packed_dense>(gru.layer));
  CHECK(std::get<packed_dense>(gru.layer).blocks() == 3);
  CHECK(std::get<packed_dense>(gru.layer).block_out_features() == 16);
  CHECK(gru.gate_order == std::vector<std::string>{"reset", "update", "new"});
  const model_parameter& head = plan.parameters[3];
  CHECK(head.scheme.text() == "lecun-normal");  // head.weight beats **.weight
  CHECK(head.element == element_kind::f16);
  CHECK(std::holds_alternative<dense>(head.layer));
  CHECK(plan.parameters[4].element == element_kind::f16);
  CHECK(std::get<bias_vector>(plan.parameters[4].layer).size == 2);
}

TEST_CASE("apply_rules: a tie between equally specific rules is an error naming the parameter and both rules") {
  const std::string e = rules_error({{"a.b", {4, 4}}}, {rule("a.*", "he-normal", layer_kind::dense), rule("*.b", "glorot-uniform")});
  CHECK(has(e, "parameter 'a.b'"));
  CHECK(has(e, "rules[0] 'a.*' and rules[1] '*.b'"));
  CHECK(has(e, "scheme"));
  CHECK(has(e, "equally specific"));
  // Equally specific but for different fields: no conflict.
  CHECK(rules_error({{"a.b", {4, 4}}}, {rule("a.*", "he-normal"), rule("*.b", nullptr, layer_kind::dense)}).empty());
  // A more specific third rule settles the tie.
  CHECK(rules_error({{"a.b", {4, 4}}}, {rule("a.*", "he-normal", layer_kind::dense), rule("*.b", "glorot-uniform"),
                                        rule("a.b", "lecun-normal")})
            .empty());
  // Agreeing rules still tie: the plan is ambiguous as written.
  CHECK(has(rules_error({{"a.b", {4, 4}}}, {rule("a.*", "he-normal", layer_kind::dense), rule("*.b", "he-normal")}),
            "equally specific"));
}

TEST_CASE("apply_rules: a parameter no rule matches, or left without a layer or scheme, is an error naming it") {
  std::string e = rules_error({{"fc.weight", {4, 4}}, {"fc.bias", {4}}}, {rule("**.weight", "he-normal", layer_kind::dense)});
  CHECK(has(e, "parameter 'fc.bias': no rule matches it"));
  e = rules_error({{"fc.weight", {4, 4}}}, {rule("**.weight", "he-normal")});
  CHECK(has(e, "parameter 'fc.weight' has no layer"));
  CHECK(has(e, "rules[0] '**.weight'"));
  e = rules_error({{"fc.weight", {4, 4}}}, {rule("**.weight", nullptr, layer_kind::dense)});
  CHECK(has(e, "parameter 'fc.weight' has no scheme"));
}

TEST_CASE("apply_rules: a pattern that matches no parameter is an error naming the pattern") {
  const std::string e = rules_error({{"fc.weight", {4, 4}}},
                                    {rule("**.weight", "he-normal", layer_kind::dense), rule("**.bais", "zeros")});
  CHECK(has(e, "rules[1] '**.bais' matches no parameter"));
  CHECK(has(rules_error({{"a", {4}}}, {rule("a", nullptr)}), "rules[0] 'a' sets nothing"));
  CHECK(has(rules_error({{"a", {4}}}, {rule("a**", "zeros", layer_kind::bias), rule("***", "zeros")}),
            "rules[1] '***': kindling::name_pattern: argument 'text' = '***', expected '*' (within one segment) or "
            "'**' (across segments), not 3 '*' in a row"));
}

TEST_CASE("layer templates: the shape gives the sizes in every layout, or the error says why not") {
  layer_template conv{layer_kind::convolution};
  conv.groups = 2;
  const convolution c = std::get<convolution>(conv.make({32, 8, 5}));
  CHECK(c.in_channels() == 16);
  CHECK(c.out_channels() == 32);
  CHECK(c.kernel() == std::vector<std::uint64_t>{5});
  CHECK(c.layer_fans().fan_in == 40);
  conv.layout = weight_layout::spatial_in_out;
  conv.groups = 1;
  const convolution h = std::get<convolution>(conv.make({3, 3, 16, 64}));
  CHECK(h.in_channels() == 16);
  CHECK(h.out_channels() == 64);
  conv.layout = weight_layout::out_spatial_in;
  const convolution o = std::get<convolution>(conv.make({64, 3, 3, 16}));
  CHECK(o.in_channels() == 16);
  CHECK(o.weight_shape() == std::vector<std::uint64_t>{64, 3, 3, 16});
  layer_template tr{layer_kind::transposed_convolution};
  const transposed_convolution t = std::get<transposed_convolution>(tr.make({16, 8, 4, 4}));
  CHECK(t.in_channels() == 16);
  CHECK(t.out_channels() == 8);
  tr.layout = weight_layout::spatial_out_in;
  CHECK(std::get<transposed_convolution>(tr.make({4, 4, 8, 16})).weight_shape() == std::vector<std::uint64_t>{4, 4, 8, 16});
  layer_template d{layer_kind::dense};
  d.layout = weight_layout::in_out;
  CHECK(std::get<dense>(d.make({128, 64})).out_features() == 64);
  CHECK(std::get<embedding>(layer_template{layer_kind::embedding}.make({1000, 32})).vocabulary() == 1000);
  CHECK_THROWS_WITH(layer_template{layer_kind::dense}.make({4, 4, 4}), doctest::Contains("kindling::layer_template::make: argument 'shape' = [4, 4, 4] (rank 3), expected rank 2 "
                                      "for a dense layer"));
  layer_template p{layer_kind::packed};
  p.blocks = 4;
  CHECK_THROWS_WITH(p.make({30, 8}), doctest::Contains("argument 'shape' = [30, 8] (30 stacked rows), expected stacked rows that split into 4 "
                                                   "equal blocks"));
  const std::string e = rules_error({{"x.weight", {4, 4, 4}}}, {rule("x.*", "he-normal", layer_kind::dense)});
  CHECK(has(e, "parameter 'x.weight' (layer from rules[0] 'x.*')"));
}

TEST_CASE("JSON rules: the conveyor belt written with rules is the plan written out in full") {
  const auto read = [](const std::string& file) {
    std::uint64_t seed = 0;
    const model_plan plan = read_plan(std::string(KINDLING_TEST_SOURCE_DIR) + "/../examples/models/" + file, &seed);
    CHECK(seed == 2026);
    return plan;
  };
  const model_plan full = read("conveyor_belt.json");
  const model_plan ruled = read("conveyor_belt_rules.json");
  REQUIRE(full.parameters.size() == ruled.parameters.size());
  for (std::size_t i = 0; i < full.parameters.size(); ++i) {
    CAPTURE(full.parameters[i].name);
    CHECK(manifest_record(full.parameters[i]) == manifest_record(ruled.parameters[i]));
  }
}

TEST_CASE("JSON rules: errors name the rule's path and the parameter") {
  const std::string head = R"({"rules": [)";
  CHECK(has(plan_error(head + R"({"match": "**.w", "scheme": "zeros", "layer": "dense"},
                                {"match": "nothing.*", "scheme": "zeros"}],
              "parameters": [{"name": "a.w", "shape": [2, 2]}]})"),
            "P: rules[1] 'nothing.*' matches no parameter"));
  CHECK(has(plan_error(head + R"({"match": "a.*", "scheme": "zeros", "layer": "dense"}, {"match": "*.w", "scheme": "he-normal"}],
              "parameters": [{"name": "a.w", "shape": [2, 2]}]})"),
            "P: parameter 'a.w': rules[0] 'a.*' and rules[1] '*.w' both set its scheme"));
  CHECK(has(plan_error(head + R"({"match": "a.*", "colour": "red"}], "parameters": [{"name": "a.w", "shape": [2, 2]}]})"),
            "unknown key 'rules[0].colour'"));
  CHECK(has(plan_error(head + R"({"match": "a.*", "layer": "lstm"}], "parameters": [{"name": "a.w", "shape": [2, 2]}]})"),
            "'rules[0].layer' = \"lstm\""));
  CHECK(has(plan_error(head + R"({"match": "a.*", "layer": {"kind": "packed"}}], "parameters": [{"name": "a.w", "shape": [2, 2]}]})"),
            "its \"blocks\""));
  CHECK(has(plan_error(head + R"({"match": "a.*", "layer": "dense"}], "parameters": [{"name": "a.w", "shape": [2, 2]}]})"),
            "parameter 'a.w' has no scheme"));
  CHECK(has(plan_error(head + R"({"match": "a.*", "layer": "dense", "scheme": "zeros"}], "parameters": [{"name": "a.w"}]})"),
            "'parameters[0]' has neither \"layer\" nor \"shape\""));
  CHECK(has(plan_error(head + R"({"match": "a.*", "sets": 1}], "parameters": [{"name": "a.w"}]})"), "unknown key 'rules[0].sets'"));
  CHECK(has(plan_error(head + R"({"match": "a.*"}], "parameters": [{"name": "a.w", "shape": [2]}]})"), "'rules[0]' sets nothing"));
  CHECK(has(plan_error(head + R"({"match": "a.*", "layer": "dense", "scheme": "zeros"}], "parameters": [{"name": "a.w", "shape": [0, 2]}]})"),
            "'parameters[0].shape[0]' = 0"));
  // Without "rules" a parameter still needs its layer and scheme.
  CHECK(has(plan_error(R"({"parameters": [{"name": "a.w", "shape": [2, 2]}]})"), "'parameters[0]' has no key 'layer'"));
}
