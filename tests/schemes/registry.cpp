// Tests of kindling/schemes/registry.hpp: scheme values by name, their text, and that a
// registry scheme writes the same bits as the scheme type it stands for. The variance
// formulas the schemes implement are checked against their papers in fan_scaled.cpp.
#include <doctest/doctest.h>

#include <stdexcept>
#include <string>
#include <vector>

#include "kindling/schemes/registry.hpp"

using namespace kindling;

namespace {

std::string message_of(const std::string& text) {
  try {
    parse_scheme(text, "layers[3].scheme");
  } catch (const std::invalid_argument& e) {
    return e.what();
  }
  return "";
}

template <class S>
std::vector<float> drawn(const S& scheme) {
  std::vector<float> out(64 * 32);
  const strided_view<float> v(out.data(), shape{64, 32});
  initialize(v, dense(32, 64), scheme, make_stream(11, "fc.weight"));
  return out;
}

}  // namespace

TEST_CASE("every registry name parses, and its text parses back to the same value") {
  for (const scheme_entry& e : scheme_registry()) {
    scheme_arguments_list required;
    for (const scheme_argument& a : e.arguments) {
      if (a.required) required.emplace_back(a.key, 0.5);
    }
    const scheme_value v = make_scheme_value(e.name, required);
    CHECK(v.name() == e.name);
    CHECK(parse_scheme(v.text()) == v);
  }
  const scheme_value g = parse_scheme(" glorot-uniform ( gain = 1.5 ) ");
  CHECK(g.text() == "glorot-uniform(gain=1.5)");
  CHECK(*g.argument("gain") == 1.5);
  // defaults are resolved, and left out of the text
  const scheme_value s = parse_scheme("sparse(std=0.25)");
  CHECK(*s.argument("nonzero") == 15);
  CHECK(s.text() == "sparse(std=0.25)");
  CHECK(parse_scheme("he-normal(slope=0)").text() == "he-normal");
}

TEST_CASE("a registry scheme writes the bits of the scheme type it names") {
  CHECK(drawn(parse_scheme("he-normal")) == drawn(he_normal{}));
  CHECK(drawn(parse_scheme("glorot-uniform(gain=2)")) == drawn(glorot_uniform{2.0}));
  CHECK(drawn(parse_scheme("orthogonal(gain=0.5)")) == drawn(orthogonal{0.5}));
  CHECK(drawn(parse_scheme("normal(std=0.02)")) == drawn(fixed_normal{0.0, 0.02}));
  // He with a gain: Var W = gain^2 / fan_in, the fan_scaled rule
  fan_scaled rule = he_normal{}.rule();
  rule.scale = 9.0;
  CHECK(drawn(parse_scheme("he-normal(gain=3)")) == drawn(rule));
  CHECK(drawn(parse_scheme("he-normal(gain=3)")) != drawn(he_normal{}));
}

TEST_CASE("bad scheme text names the key, the value and what was expected") {
  const auto has = [](const std::string& text, const std::string& part) {
    const std::string m = message_of(text);
    INFO(m);
    return m.find(part) != std::string::npos;
  };
  CHECK(message_of("he-norml").find("layers[3].scheme: kindling::make_scheme_value: argument 'name' = 'he-norml', "
                                    "expected a scheme, one of zeros") == 0);
  CHECK(has("he-normal(std=1)", "kindling::make_scheme_value: argument 'std' = 1, expected an argument of scheme "
                                "'he-normal': one of gain, slope"));
  CHECK(has("normal", "argument 'std' = (none), expected a finite number > 0: scheme 'normal' needs argument 'std'"));
  CHECK(has("normal(std=-1)", "argument 'std' = -1, expected a finite number > 0 for scheme 'normal'"));
  CHECK(has("glorot-normal(gain=1e200)", "whose square is finite"));
  CHECK(has("sparse(nonzero=2.5)", "expected a whole number"));
  CHECK(has("constant(value=1,value=2)", "argument 'value' = 2, expected one value for scheme 'constant' (the "
                                         "argument is given twice)"));
  CHECK(has("constant(value=x)", "layers[3].scheme: kindling::parse_scheme: argument 'text' = 'constant(value=x)', "
                                 "expected a scheme name"));
  CHECK(has("constant(value=x)", "is not key=number"));
  CHECK(has("constant(value=1", "no closing ')'"));
  CHECK(has("(gain=1)", "no scheme name"));
}
