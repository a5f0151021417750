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
  CHECK(message_of("he-norml").find("layers[3].scheme 'he-norml' is not a scheme, expected one of zeros") == 0);
  CHECK(message_of("he-normal(std=1)").find("argument 'std' does not apply to scheme 'he-normal', expected one of gain, slope") !=
        std::string::npos);
  CHECK(message_of("normal").find("needs argument 'std'") != std::string::npos);
  CHECK(message_of("normal(std=-1)").find("'std' of scheme 'normal' = -1, expected a finite number > 0") !=
        std::string::npos);
  CHECK(message_of("glorot-normal(gain=1e200)").find("whose square is finite") != std::string::npos);
  CHECK(message_of("sparse(nonzero=2.5)").find("expected a whole number") != std::string::npos);
  CHECK(message_of("constant(value=1,value=2)").find("given twice") != std::string::npos);
  CHECK(message_of("constant(value=x)").find("is not key=number") != std::string::npos);
  CHECK(message_of("constant(value=1").find("no closing ')'") != std::string::npos);
  CHECK(message_of("(gain=1)").find("no scheme name") != std::string::npos);
}
