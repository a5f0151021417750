// Tests of propagate/linear.hpp: Glorot & Bengio's linear-regime products (AISTATS 2010,
// sec. 4.2, eqs. 5-7), Var[z^i] = Var[x] prod n_in Var W forward and Var[dC/dz^i] =
// Var[dC/dz^d] prod n_out Var W backward, written out by hand for a small stack. The
// products ignore activations and biases by definition, so a ReLU stack with biases has
// the products of the same stack without them. The cross-check against the mean-field
// prediction of an identity stack is in mean_field.cpp.
#include "kindling/propagate/linear.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <stdexcept>
#include <string>

#include "../support/errors.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

TEST_CASE("the products are Glorot & Bengio's, whatever the activations and biases") {
  // 12 -> 24 -> 6 -> 3, He normal (Var W = 2 / fan_in), Glorot uniform (2 / (in + out)),
  // LeCun normal (1 / fan_in); input second moment 0.5, output gradient variance 4.
  const auto build = [](bool nonlinear) {
    layer_stack s(12, 0.5);
    s.add_dense(24, nonlinear ? nonlinearity(activation::relu()) : activation::identity(), he_normal{},
                nonlinear ? 0.3 : 0.0)
        .add_dense(6, nonlinear ? nonlinearity(activation::tanh()) : activation::identity(), glorot_uniform{})
        .add_dense(3, activation::identity(), lecun_normal{});
    return s;
  };
  const linear_products p = glorot_products(build(true), 4.0);
  REQUIRE(p.forward.size() == 3);
  REQUIRE(p.backward.size() == 3);
  // Forward: 0.5 * (12 * 2/12) = 1, then * (24 * 2/30) = 1.6, then * (6 * 1/6) = 1.6.
  CHECK(p.forward[0] == doctest::Approx(1.0).epsilon(1e-15));
  CHECK(p.forward[1] == doctest::Approx(1.6).epsilon(1e-15));
  CHECK(p.forward[2] == doctest::Approx(1.6).epsilon(1e-15));
  // Backward from the top: 4, then * (3 * 1/6) = 2, then * (6 * 2/30) = 0.8.
  CHECK(p.backward[2] == doctest::Approx(4.0).epsilon(1e-15));
  CHECK(p.backward[1] == doctest::Approx(2.0).epsilon(1e-15));
  CHECK(p.backward[0] == doctest::Approx(0.8).epsilon(1e-15));
  const linear_products q = glorot_products(build(false), 4.0);
  CHECK(q.forward == p.forward);
  CHECK(q.backward == p.backward);
}

TEST_CASE("glorot_products refuses an empty stack and a bad output gradient variance") {
  CHECK(mentions(message_of<std::invalid_argument>([] { (void)glorot_products(layer_stack(4)); }), "no layers"));
  layer_stack s(4);
  s.add_dense(3, activation::relu(), he_normal{});
  for (double bad : {0.0, -1.0, std::nan(""), HUGE_VAL}) {
    const std::string m = message_of<std::domain_error>([&] { (void)glorot_products(s, bad); });
    CAPTURE(bad);
    CHECK(mentions(m, "kindling::glorot_products: argument 'output_gradient_variance' = "));
    CHECK(mentions(m, "expected a finite number > 0"));
  }
}
