// Tests of kindling/model/plan.hpp and kindling/io/manifest.hpp: a whole model
// initialized in one call gives the bits of the per-tensor calls; a model written to
// safetensors and its manifest regenerate every parameter bit for bit; bad plans and a
// manifest of another format version are refused. The digest is SipHash-2-4, whose
// known-answer vector (Aumasson & Bernstein 2012, Appendix A) is tested in
// tests/random/; here a digest must change when one byte does.
#include <doctest/doctest.h>

#include <cstdio>
#include <fstream>
#include <map>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/plan_error.hpp"
#include "kindling/io/manifest.hpp"

using namespace kindling;
using kindling_test::plan_error;

namespace {

// A small conveyor-belt fault detector: a 1-D convolution, a GRU with packed gates, a head.
model_plan belt_plan() {
  const char* text = R"j({"format": "kindling-model-plan", "seed": 42, "parameters": [
    {"name": "conv1.weight", "scheme": "he-normal", "layer": {"kind": "convolution", "in": 3, "out": 8, "kernel": [5]}},
    {"name": "conv1.bias", "scheme": "zeros", "layer": {"kind": "bias", "size": 8}},
    {"name": "gru.w_ih", "scheme": "glorot-uniform", "dtype": "bf16",
     "layer": {"kind": "packed", "blocks": 3, "in": 8, "block_out": 16, "order": ["reset", "update", "new"]}},
    {"name": "gru.w_hh", "scheme": "orthogonal", "dtype": "f64", "layer": {"kind": "packed", "blocks": 3, "in": 16, "block_out": 16}},
    {"name": "head.weight", "scheme": {"name": "lecun-normal", "gain": 0.5}, "dtype": "f16", "layer": {"kind": "dense", "in": 16, "out": 4}}
  ]})j";
  std::uint64_t seed = 0;
  const model_plan plan = plan_from_json(parse_json_once(text, "belt"), "belt", &seed);
  CHECK(seed == 42);
  return plan;
}

bool has(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

}  // namespace

TEST_CASE("initialize_model gives every parameter the bits of its own initialize call") {
  const model_plan plan = belt_plan();
  std::map<std::string, std::vector<float>> f32;
  std::map<std::string, std::vector<double>> f64;
  std::map<std::string, std::vector<bfloat16>> b16;
  std::map<std::string, std::vector<float16>> h16;
  initialize_model(plan, 42, [&](const model_parameter& p) -> any_tensor_view {
    const std::vector<std::uint64_t> s = p.full_shape();
    std::uint64_t n = 1;
    for (std::uint64_t d : s) n *= d;
    const shape g(s.begin(), s.end());
    switch (p.element) {
      case element_kind::f64: f64[p.name].resize(n); return strided_view<double>(f64[p.name].data(), g);
      case element_kind::bf16: b16[p.name].resize(n); return strided_view<bfloat16>(b16[p.name].data(), g);
      case element_kind::f16: h16[p.name].resize(n); return strided_view<float16>(h16[p.name].data(), g);
      default: f32[p.name].resize(n); return strided_view<float>(f32[p.name].data(), g);
    }
  });
  std::vector<float> conv(8 * 3 * 5);
  initialize(strided_view<float>(conv.data(), shape{8, 3, 5}), convolution(3, 8, {5}), he_normal{}, make_stream(42, "conv1.weight"));
  CHECK(f32["conv1.weight"] == conv);
  CHECK(f32["conv1.bias"] == std::vector<float>(8, 0.0f));
  std::vector<double> whh(48 * 16);
  initialize(strided_view<double>(whh.data(), shape{48, 16}), packed_dense::gru(16, 16), orthogonal{}, make_stream(42, "gru.w_hh"));
  CHECK(f64["gru.w_hh"] == whh);
  std::vector<bfloat16> wih(48 * 8);
  initialize(strided_view<bfloat16>(wih.data(), shape{48, 8}), packed_dense::gru(8, 16), glorot_uniform{}, make_stream(42, "gru.w_ih"));
  bool same = true;
  for (std::size_t i = 0; i < wih.size(); ++i) same = same && wih[i].bits == b16["gru.w_ih"][i].bits;
  CHECK(same);
  // A storage of the wrong element type is refused, naming the parameter.
  CHECK_THROWS_WITH_AS(initialize_model(plan, 42, [&](const model_parameter&) -> any_tensor_view {
                         return strided_view<double>(whh.data(), shape{48, 16});
                       }),
                       doctest::Contains("kindling::initialize_parameter: argument 'v' = a view of f64 elements, expected f32 "
                                         "elements, the element type of parameter 'conv1.weight'"),
                       std::invalid_argument);
}

TEST_CASE("a model in safetensors and its manifest: read back, regenerated bit for bit, digests catch one byte") {
  const model_plan plan = belt_plan();
  const std::string path = "belt_model.safetensors";
  const nlohmann::json manifest = write_model_safetensors(plan, 42, path);
  CHECK(manifest["format_version"] == manifest_format_version);
  const nlohmann::json& head = manifest["parameters"][4];
  CHECK(head["scheme"] == "lecun-normal(gain=0.5)");
  CHECK(head["fans"]["in"] == 16);
  // lecun-normal with gain 0.5: Var W = 0.25 / fan_in (the fan_scaled rule), sigma = 0.5 / 4
  CHECK(head["distribution"]["sigma"].get<double>() == doctest::Approx(0.125).epsilon(1e-15));
  // glorot-uniform on a GRU block: bound sqrt(6 / (8 + 16)) = 0.5 (Glorot & Bengio 2010, eq. 16)
  CHECK(manifest["parameters"][2]["distribution"]["bound"].get<double>() == doctest::Approx(0.5).epsilon(1e-15));
  // regenerate from the manifest alone (through its JSON text)
  std::uint64_t seed = 0;
  const model_plan again = plan_from_manifest(nlohmann::json::parse(manifest.dump()), "M", &seed);
  CHECK(seed == 42);
  REQUIRE(again.parameters.size() == plan.parameters.size());
  safetensors_reader file(path);
  for (std::size_t i = 0; i < again.parameters.size(); ++i) {
    const model_parameter& p = again.parameters[i];
    CHECK(regenerate_digest(p, seed) == manifest["parameters"][i]["digest"]);
    CHECK(p.scheme == plan.parameters[i].scheme);
    // the file's bytes are the regenerated bytes
    const safetensors_entry* e = file.index().find(p.name);
    REQUIRE(e != nullptr);
    std::vector<char> got(e->end - e->begin), want(got.size());
    file.read(*e, 0, got.data(), got.size());
    parameter_bytes(p, seed).read(0, want.data(), want.size());
    CHECK(got == want);
    parameter_digest d;
    d.update(got.data(), got.size());
    CHECK(d.hex() == manifest["parameters"][i]["digest"]);
    got[got.size() / 2] = static_cast<char>(got[got.size() / 2] ^ 1);
    parameter_digest flipped;
    flipped.update(got.data(), got.size());
    CHECK(flipped.hex() != manifest["parameters"][i]["digest"]);
  }
  // another seed gives other digests
  CHECK(regenerate_digest(plan.parameters[0], 43) != manifest["parameters"][0]["digest"]);
  std::remove(path.c_str());
}

TEST_CASE("a manifest of another format version is refused") {
  nlohmann::json m = write_model_safetensors(belt_plan(), 1, "belt_v.safetensors");
  std::remove("belt_v.safetensors");
  std::uint64_t seed = 0;
  m["format_version"] = 2;
  CHECK_THROWS_WITH_AS(plan_from_manifest(m, "M", &seed), doctest::Contains("'format_version' = 2, expected 1"),
                       std::invalid_argument);
  m["format_version"] = 1;
  m["values_format_version"] = 7;
  CHECK_THROWS_WITH_AS(plan_from_manifest(m, "M", &seed), doctest::Contains("'values_format_version' = 7, expected 1"),
                       std::invalid_argument);
}

TEST_CASE("bad plans are refused, naming the key, the value and what was expected") {
  const std::string dense = R"j("layer": {"kind": "dense", "in": 4, "out": 2})j";
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", )j" + dense + R"j(}, {"name": "a", "scheme": "zeros", )j" +
                       dense + "}]}"),
            "'parameters[1].name' = \"a\", expected a name not used before in the plan"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "he-normal", "layer": {"kind": "bias", "size": 4}}]})j"),
            "'parameters[0]': parameter 'a': kindling::fan_scaled: argument 'fans' = (fan_in 0, fan_out 0)"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", "layer": {"kind": "lstm"}}]})j"),
            "'parameters[0].layer.kind' = \"lstm\", expected dense, convolution"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", "layer": {"kind": "convolution", "in": 4, "out": 2, "kernel": [0]}}]})j"),
            "'parameters[0].layer.kernel[0]' = 0, expected a positive integer"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", "shape": [4, 2], )j" + dense + "}]}"),
            "'parameters[0].shape' = [4,2], expected the layer's shape [2,4]"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "he-normal(gain=0)", )j" + dense + "}]}"),
            "'parameters[0].scheme': kindling::make_scheme_value: argument 'gain' = 0, expected a number > 0 whose "
            "square is finite"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", "colour": 1, )j" + dense + "}]}"),
            "unknown key 'parameters[0].colour'"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", "dtype": "i8", )j" + dense + "}]}"),
            "'parameters[0].dtype' = \"i8\", expected f32, f64, f16 or bf16"));
  CHECK(has(plan_error(R"j({"parameters": [{"name": "a", "scheme": "zeros", "layer": {"kind": "packed", "blocks": 3, "in": 2, "block_out": 2, "order": ["r"]}}]})j"),
            "parameter 'a': kindling::check_plan: argument 'gate_order' = 1 labels, expected one label for each block"));
  CHECK(has(plan_error(R"j({"seed": -1, "parameters": []})j"), "'seed' = -1"));
}
