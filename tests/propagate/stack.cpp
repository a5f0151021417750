// Tests of propagate/stack.hpp: what a layer stack records for each layer (fans, weight
// variance from the scheme's published formula, sigma_w^2 forward and backward), the
// nonlinearity an activation becomes, and the bad input the stack refuses. The expected
// values are the formulas themselves, written out by hand: Var W = 2 / fan_in (He et al.,
// ICCV 2015, eq. 10), 2 / (fan_in + fan_out) (Glorot & Bengio, AISTATS 2010, eq. 16),
// (hi - lo)^2 / 12 for a uniform; E[relu(sqrt(q) z)^2] = q / 2 by the symmetry of z (the
// step of He et al. 2015, eq. 7); REFERENCES.md.
#include "kindling/propagate/stack.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <stdexcept>
#include <string>

#include "../support/errors.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

TEST_CASE("a nonlinearity made from an activation keeps its name, kink, values and slopes") {
  const nonlinearity relu = activation::relu();
  CHECK(relu.name() == activation::relu().name());
  REQUIRE(relu.kink().has_value());
  CHECK(*relu.kink() == 0.0);
  CHECK(relu(-1.5) == 0.0);
  CHECK(relu(2.5) == 2.5);
  CHECK(relu.slope(-1.5) == 0.0);
  CHECK(relu.slope(2.5) == 1.0);
  const nonlinearity tanh = activation::tanh();
  CHECK_FALSE(tanh.kink().has_value());
  CHECK(tanh(0.7) == doctest::Approx(std::tanh(0.7)).epsilon(1e-15));
}

TEST_CASE("the moments of ReLU and of the identity match their closed forms") {
  const nonlinearity relu = activation::relu();
  const nonlinearity id = activation::identity();
  for (double q : {0.25, 1.0, 3.0, 40.0}) {
    CAPTURE(q);
    CHECK(relu.second_moment(q) == doctest::Approx(q / 2).epsilon(1e-13));     // half of E[x^2]
    CHECK(relu.slope_second_moment(q) == doctest::Approx(0.5).epsilon(1e-13));  // P(x > 0)
    CHECK(relu.mean(q) == doctest::Approx(std::sqrt(q / (2 * std::acos(-1.0)))).epsilon(1e-13));  // E[x+] = sqrt(q / 2 pi)
    CHECK(id.second_moment(q) == doctest::Approx(q).epsilon(1e-13));
    CHECK(id.slope_second_moment(q) == doctest::Approx(1.0).epsilon(1e-13));
    CHECK(id.second_moment_slope(q) == doctest::Approx(1.0).epsilon(1e-13));   // d/dq of q
  }
}

TEST_CASE("a callable activation works like a built-in one") {
  const nonlinearity mine = nonlinearity::custom(
      "my_tanh", [](double x) { return std::tanh(x); },
      [](double x) { return 1.0 - std::tanh(x) * std::tanh(x); });
  const nonlinearity ref = activation::tanh();
  CHECK(mine.name() == "my_tanh");
  CHECK(mine.second_moment(2.3) == doctest::Approx(ref.second_moment(2.3)).epsilon(1e-15));
  CHECK(mine.slope_second_moment(2.3) == doctest::Approx(ref.slope_second_moment(2.3)).epsilon(1e-15));
}

TEST_CASE("each layer records its fans and the weight variance of its scheme") {
  layer_stack s(30, 2.0);
  s.add_dense(50, activation::relu(), he_normal{}, 0.1)
      .add_dense(20, activation::tanh(), glorot_uniform{})
      .add_dense(10, activation::identity(), fixed_uniform{-0.3, 0.3})
      .add_dense_with_variance(5, activation::identity(), 0.04, 0.0, "head");
  REQUIRE(s.depth() == 4);
  CHECK(s.input_second_moment() == 2.0);
  CHECK(s[0].fans == fans{30, 50, 1});
  CHECK(s[0].weight_variance == doctest::Approx(2.0 / 30).epsilon(1e-15));
  CHECK(s[0].forward_scale() == doctest::Approx(2.0).epsilon(1e-15));
  CHECK(s[0].backward_scale() == doctest::Approx(50 * 2.0 / 30).epsilon(1e-15));
  CHECK(s[0].bias_variance == 0.1);
  CHECK(s[1].fans == fans{50, 20, 1});
  CHECK(s[1].weight_variance == doctest::Approx(2.0 / 70).epsilon(1e-15));
  CHECK(s[2].weight_variance == doctest::Approx(0.6 * 0.6 / 12).epsilon(1e-15));
  CHECK(s[3].weight_variance == 0.04);
  CHECK(s[3].label == "head");
  CHECK(s.top_width() == 5);
  layer_stack c(16);
  c.add_convolution(convolution(16, 32, {3, 3}), activation::relu(), he_normal{});
  CHECK_FALSE(c[0].dense);
  CHECK(c[0].fans.fan_in == 16 * 9);
  CHECK(c[0].weight_variance == doctest::Approx(2.0 / 144).epsilon(1e-15));
}

TEST_CASE("bad input to the stack is refused with a message naming the argument") {
  CHECK(mentions(message_of<std::invalid_argument>([] { layer_stack s(0); }), "'input_width' = 0"));
  CHECK(mentions(message_of<std::invalid_argument>([] { layer_stack(4).add_dense(0, activation::relu(), he_normal{}); }),
                 "'width' = 0"));
  CHECK(mentions(message_of<std::domain_error>([] { layer_stack(4).add_dense_with_variance(3, activation::relu(), -1.0); }),
                 "'weight_variance' = -1"));
  CHECK(mentions(message_of<std::domain_error>([] { layer_stack(4).add_dense(3, activation::relu(), he_normal{}, -0.5); }),
                 "'bias_variance' = -0.5"));
  CHECK(mentions(message_of<std::domain_error>([] { layer_stack(4, 0.0); }), "'input_second_moment' = 0"));
  CHECK(mentions(message_of<std::invalid_argument>([] {
                   layer_stack(4).add_convolution(convolution(8, 8, {3}), activation::relu(), he_normal{});
                 }),
                 "argument 'conv.in_channels' = 8"));
  CHECK(mentions(message_of<std::domain_error>([] {
                   layer_stack(4).add_dense(3, activation::relu(), fixed_normal{0.5, 1.0});
                 }),
                 "kindling::weight_variance_of: argument 'scheme.mean' = 0.5, expected 0"));
  CHECK(mentions(message_of<std::invalid_argument>([] { nonlinearity::custom("x", nullptr, [](double) { return 1.0; }); }),
                 "argument 'phi' = an empty function, expected a callable"));
  // exp(x^2) has E[phi(x)^2] = infinity for Var x >= 1/4.
  const nonlinearity wild = nonlinearity::custom("exp_square", [](double x) { return std::exp(x * x); },
                                                 [](double x) { return 2 * x * std::exp(x * x); });
  const std::string m = message_of<std::domain_error>([&] { (void)wild.second_moment(1.0); });
  CHECK(mentions(m, "exp_square"));
  CHECK(mentions(m, "does not exist"));
}
