// Tests of propagate/mean_field.hpp against published values (the stack itself:
// tests/propagate/stack.cpp; the linear-regime products alone: linear.cpp).
#include "kindling/propagate/linear.hpp"
#include "kindling/propagate/mean_field.hpp"
#include "kindling/schemes/fan_scaled.hpp"

#include <doctest/doctest.h>

#include <cmath>

#include "../support/errors.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

TEST_CASE("ReLU with sigma_w^2 = 2, sigma_b^2 = 0 keeps the variance and has chi = 1 (He et al. 2015)") {
  layer_stack s(256);
  for (int i = 0; i < 30; ++i) s.add_dense(256, activation::relu(), he_normal{});
  const auto rows = predict(s);
  // He et al. 2015, eq. 10: Var y_l = Var y_1 for n Var w = 2; and chi = 2 * 1/2.
  // q_1 = 2 E[x^2] = 2 (the input is not a ReLU output), then constant.
  for (std::size_t l = 1; l < rows.size(); ++l) {
    CHECK_MESSAGE(rows[l].preactivation_variance == doctest::Approx(2.0).epsilon(1e-13),
                  "q_l constant, expected 2 at layer " << l);
  }
  for (std::size_t l = 0; l + 1 < rows.size(); ++l) {
    CHECK_MESSAGE(rows[l].chi == doctest::Approx(1.0).epsilon(1e-13), "chi = 1 expected");
    CHECK(rows[l].gradient_variance == doctest::Approx(0.5).epsilon(1e-12));
  }
  for (const auto& r : rows) CHECK(r.warnings.empty());
  const fixed_point_result f = length_fixed_point(activation::relu(), 2.0, 0.0, 3.0);
  CHECK(f.converged);
  CHECK(f.q == doctest::Approx(3.0).epsilon(1e-13));  // every q is a fixed point
  CHECK(f.chi == doctest::Approx(1.0).epsilon(1e-13));
}

TEST_CASE("the length map and chi match closed forms for ReLU and identity") {
  // ReLU: E[relu(sqrt(q) z)^2] = q/2, E[relu'^2] = 1/2 (He et al. 2015, sec. 2.2).
  CHECK(length_map(activation::relu(), 3.0, 1.5, 0.2) == doctest::Approx(1.5 * 1.5 + 0.2).epsilon(1e-14));
  CHECK(backward_factor(activation::relu(), 3.0, 1.5) == doctest::Approx(0.75).epsilon(1e-14));
  // identity: q -> sigma_w^2 q + sigma_b^2, fixed point sigma_b^2 / (1 - sigma_w^2).
  const fixed_point_result f = length_fixed_point(activation::identity(), 0.5, 0.3);
  CHECK(f.converged);
  CHECK(f.q == doctest::Approx(0.6).epsilon(1e-12));
  CHECK(f.chi == doctest::Approx(0.5).epsilon(1e-14));
  CHECK(f.correlation_depth == doctest::Approx(1.0 / std::log(2.0)).epsilon(1e-12));  // -1/ln chi
  CHECK(f.length_depth == doctest::Approx(1.0 / std::log(2.0)).epsilon(1e-9));
  const fixed_point_result d = length_fixed_point(activation::relu(), 2.5, 0.0);
  CHECK(d.diverged);
  CHECK_FALSE(d.converged);
}

TEST_CASE("tanh ordered phase: q* is a fixed point, chi < 1 and xi_c = -1/ln chi (Schoenholz et al. 2017)") {
  const nonlinearity t = activation::tanh();
  const fixed_point_result f = length_fixed_point(t, 1.5, 0.3);
  REQUIRE(f.converged);
  CHECK(length_map(t, f.q, 1.5, 0.3) == doctest::Approx(f.q).epsilon(1e-12));
  CHECK(f.chi < 1.0);
  CHECK(f.correlation_depth == doctest::Approx(-1.0 / std::log(f.chi)).epsilon(1e-12));
  // F'(q*) checked against a central difference of the length map.
  const double h = 1e-5;
  const double slope = (length_map(t, f.q + h, 1.5, 0.3) - length_map(t, f.q - h, 1.5, 0.3)) / (2 * h);
  CHECK(f.length_slope == doctest::Approx(slope).epsilon(1e-7));
}

TEST_CASE("SELU with LeCun normal has the fixed point mean 0, variance 1 (Klambauer et al. 2017)") {
  const nonlinearity selu = activation::selu();
  // Klambauer et al. 2017, sec. 3: for omega = 0, tau = 1 the map (mu, nu) -> (0, 1) has
  // (0, 1) as fixed point: E[selu(z)] = 0 and E[selu(z)^2] = 1 for z ~ N(0, 1).
  CHECK(std::fabs(selu.mean(1.0)) < 1e-7);  // the published constants are rounded
  CHECK(selu.second_moment(1.0) == doctest::Approx(1.0).epsilon(1e-7));
  layer_stack s(300);
  for (int i = 0; i < 20; ++i) s.add_dense(300, activation::selu(), lecun_normal{});
  const auto rows = predict(s);
  for (const auto& r : rows) CHECK(r.preactivation_variance == doctest::Approx(1.0).epsilon(1e-6));
  const fixed_point_result f = length_fixed_point(selu, 1.0, 0.0, 4.0);
  CHECK(f.converged);
  CHECK(f.q == doctest::Approx(1.0).epsilon(1e-7));  // attracting: reached from q = 4
}

TEST_CASE("an identity stack reproduces Glorot's linear products exactly (Glorot & Bengio 2010, sec. 4.2)") {
  layer_stack s(30, 2.0);
  s.add_dense(50, activation::identity(), glorot_uniform{})
      .add_dense(20, activation::identity(), glorot_normal{})
      .add_dense(70, activation::identity(), lecun_normal{})
      .add_dense(10, activation::identity(), he_uniform{});
  // Hand-written products: Var W = 2/(in+out), 2/(in+out), 1/in, 2/in.
  const double v[] = {2.0 / 80, 2.0 / 70, 1.0 / 20, 2.0 / 70};
  const double n_in[] = {30, 50, 20, 70}, n_out[] = {50, 20, 70, 10};
  const linear_products p = glorot_products(s, 3.0);
  const auto rows = predict(s, {10.0, 3.0});
  double fwd = 2.0;
  for (int i = 0; i < 4; ++i) {
    fwd *= n_in[i] * v[i];
    CHECK(p.forward[static_cast<std::size_t>(i)] == doctest::Approx(fwd).epsilon(1e-15));
    CHECK(rows[static_cast<std::size_t>(i)].preactivation_variance == doctest::Approx(fwd).epsilon(1e-14));
  }
  double bwd = 3.0;
  for (int i = 3; i >= 0; --i) {
    CHECK(p.backward[static_cast<std::size_t>(i)] == doctest::Approx(bwd).epsilon(1e-15));
    CHECK(rows[static_cast<std::size_t>(i)].gradient_variance == doctest::Approx(bwd).epsilon(1e-14));
    bwd *= n_out[i] * v[i];
  }
}

namespace {
std::size_t warning_count(const std::vector<layer_prediction>& rows) {
  std::size_t n = 0;
  for (const auto& r : rows) n += r.warnings.size();
  return n;
}
std::string all_warnings(const std::vector<layer_prediction>& rows) {
  std::string s;
  for (std::size_t l = 0; l < rows.size(); ++l) {
    for (const auto& w : rows[l].warnings) s += "[" + std::to_string(l + 1) + "] " + w + "\n";
  }
  return s;
}
}  // namespace

// Replaces "growth and shrinkage beyond the warning factor are reported per layer",
// whose ratios were taken against layer 1: the drift is now measured from the input
// (forward) and from the loss gradient (backward), over any run of layers.
TEST_CASE("predicted drift beyond the limit is warned about where it starts, input and loss steps included") {
  layer_stack s(100);
  for (int i = 0; i < 12; ++i) s.add_dense_with_variance(100, activation::relu(), 2.5 / 100);
  const auto rows = predict(s, {5.0, 1.0});
  CAPTURE(all_warnings(rows));
  // sigma_w^2 = 2.5 on ReLU: E[a^2] x1.25 a layer from the input on (He et al. 2015,
  // eq. 10), 1.25^12 = 14.6 > 5; the gradient x1.25 a layer below the top one.
  REQUIRE(rows[0].warnings.size() == 1);
  CHECK(mentions(rows[0].warnings[0], "forward: E[a^2], the second moment of the signal, grows by a factor of 14.6"));
  CHECK(mentions(rows[0].warnings[0], "per unit and per layer alike from the input to the output of layer 12"));
  CHECK(mentions(rows[0].warnings[0], "(x1.25 a layer)"));
  CHECK(mentions(rows[0].warnings[0], "explodes"));
  REQUIRE(rows[11].warnings.size() == 1);
  CHECK(mentions(rows[11].warnings[0], "backward: E[(dL/dh)^2], the second moment of the gradient, grows by a factor of 11.6"));
  CHECK(mentions(rows[11].warnings[0], "from the pre-activations of layer 12 down to the pre-activations of layer 1"));
  CHECK(warning_count(rows) == 2);
  for (std::size_t l = 0; l < rows.size(); ++l) CHECK(rows[l].forward_factor == doctest::Approx(1.25).epsilon(1e-13));
  CHECK(rows[0].activation_moment == doctest::Approx(1.25).epsilon(1e-13));

  layer_stack t(100);
  for (int i = 0; i < 12; ++i) t.add_dense_with_variance(100, activation::tanh(), 0.5 / 100);
  const auto tr = predict(t);
  CHECK(mentions(tr.front().warnings.at(0), "forward: E[a^2], the second moment of the signal, falls"));
  CHECK(mentions(tr.front().warnings.at(0), "vanishes"));
  CHECK(mentions(tr.back().warnings.at(0), "backward: E[(dL/dh)^2], the second moment of the gradient, falls"));
  CHECK(mentions(tr.back().warnings.at(0), "from the loss gradient at the output down to the pre-activations of layer 1"));
}

TEST_CASE("Glorot on a ReLU stack is flagged from layer 1: x1/2 a layer from the input on (He et al. ICCV 2015)") {
  // He et al. 2015, eq. 10: Var y_L = Var y_1 prod_l (n_l Var w_l / 2); Glorot's n Var W = 1
  // halves the signal at every ReLU layer, the first included (Glorot & Bengio 2010,
  // eq. 16 with equal fans).  Every ratio used to be taken against layer 1, so its own
  // drop from the input could not be seen.
  layer_stack s(256);
  for (int i = 0; i < 10; ++i) s.add_dense(256, activation::relu(), glorot_normal{});
  const auto rows = predict(s);
  CAPTURE(all_warnings(rows));
  CHECK(rows[0].preactivation_variance == doctest::Approx(1.0).epsilon(1e-13));  // q_1 = E[x^2]: no change yet...
  CHECK(rows[0].forward_factor == doctest::Approx(0.5).epsilon(1e-13));          // ...but E[a_1^2] = E[x^2] / 2
  REQUIRE(rows[0].warnings.size() == 1);
  CHECK(mentions(rows[0].warnings[0], "forward: E[a^2], the second moment of the signal, falls by a factor of 1.02e+03"));
  CHECK(mentions(rows[0].warnings[0], "from the input to the output of layer 10"));
  CHECK(mentions(rows[0].warnings[0], "(x0.5 a layer)"));
  REQUIRE(rows[9].warnings.size() == 1);  // backward: chi = 1/2 a layer, from the loss gradient down
  CHECK(mentions(rows[9].warnings[0], "from the loss gradient at the output down to the pre-activations of layer 1"));
  CHECK(mentions(rows[9].warnings[0], "(x0.5 a layer)"));
  CHECK(warning_count(rows) == 2);

  SUBCASE("four layers are enough: 1/16 is beyond the limit 10, three are not (1/8)") {
    layer_stack four(256), three(256);
    for (int i = 0; i < 4; ++i) four.add_dense(256, activation::relu(), glorot_normal{});
    for (int i = 0; i < 3; ++i) three.add_dense(256, activation::relu(), glorot_normal{});
    CHECK(mentions(predict(four)[0].warnings.at(0), "from the input to the output of layer 4"));
    CHECK(warning_count(predict(three)) == 0);
  }
  SUBCASE("He normal on the same stack keeps both passes: no warning (He et al. 2015)") {
    layer_stack he(256);
    for (int i = 0; i < 10; ++i) he.add_dense(256, activation::relu(), he_normal{});
    const auto h = predict(he);
    CHECK(warning_count(h) == 0);
    for (const auto& r : h) CHECK(r.forward_factor == doctest::Approx(1.0).epsilon(1e-13));
  }
}

// He et al. 2015, sec. 2.2 (after eq. 14): with fan-in scaling the backward factors
// multiply to a ratio of widths, "not a diminishing number": a change of width is
// predicted, not drift.  The old table called the 5-unit head's per-unit gradient "grew
// by a factor of 14.7 since the first layer".
TEST_CASE("a change of width is never called growth: a 5-unit head and funnels get no warning (He et al. 2015)") {
  SUBCASE("32-unit ReLU layers and a 5-unit head, with each head scheme") {
    for (int head = 0; head < 4; ++head) {
      layer_stack s(32);
      for (int i = 0; i < 6; ++i) s.add_dense(32, activation::relu(), he_normal{});
      if (head == 0) s.add_dense(5, activation::identity(), he_normal{});
      if (head == 1) s.add_dense(5, activation::identity(), glorot_uniform{});
      if (head == 2) s.add_dense(5, activation::identity(), lecun_normal{});
      if (head == 3) s.add_dense(5, activation::identity(), he_normal{0.0, fan_basis::out});
      CAPTURE(head);
      const auto rows = predict(s);
      CAPTURE(all_warnings(rows));
      CHECK(warning_count(rows) == 0);
    }
  }
  SUBCASE("tanh layers of 32 with a Glorot 5-unit head, and the same in front of a wide input") {
    layer_stack s(512);
    for (int i = 0; i < 6; ++i) s.add_dense(32, activation::tanh(), glorot_uniform{5.0 / 3.0});
    s.add_dense(5, activation::identity(), glorot_uniform{});
    CHECK(warning_count(predict(s)) == 0);
  }
  SUBCASE("a funnel 1024 -> 8 and a widening stack 8 -> 1024, fan-in, fan-out and fan-average") {
    for (int scheme = 0; scheme < 3; ++scheme) {
      layer_stack down(1024), up(8);
      for (std::uint64_t w = 512; w >= 8; w /= 2) {
        if (scheme == 0) down.add_dense(w, activation::relu(), he_normal{});
        if (scheme == 1) down.add_dense(w, activation::relu(), he_normal{0.0, fan_basis::out});
        if (scheme == 2) down.add_dense(w, activation::tanh(), glorot_normal{});
      }
      for (std::uint64_t w = 16; w <= 1024; w *= 2) {
        if (scheme == 0) up.add_dense(w, activation::relu(), he_normal{});
        if (scheme == 1) up.add_dense(w, activation::relu(), he_normal{0.0, fan_basis::out});
        if (scheme == 2) up.add_dense(w, activation::tanh(), glorot_normal{});
      }
      CAPTURE(scheme);
      CAPTURE(all_warnings(predict(down)));
      CAPTURE(all_warnings(predict(up)));
      CHECK(warning_count(predict(down)) == 0);
      CHECK(warning_count(predict(up)) == 0);
    }
  }
  SUBCASE("but real drift in a funnel is still seen: Glorot on ReLU, 1024 -> 8") {
    layer_stack down(1024);
    for (std::uint64_t w = 512; w >= 8; w /= 2) down.add_dense(w, activation::relu(), glorot_normal{});
    const auto rows = predict(down);
    CAPTURE(all_warnings(rows));
    REQUIRE_FALSE(rows[0].warnings.empty());
    CHECK(mentions(rows[0].warnings[0], "forward"));
    CHECK(mentions(rows[0].warnings[0], "from the input"));
  }
}

TEST_CASE("convolution layers enter through their fans") {
  layer_stack s(16);
  s.add_convolution(convolution(16, 32, {3, 3}), activation::relu(), he_normal{})
      .add_convolution(convolution(32, 32, {3, 3}), activation::relu(), he_normal{});
  const auto rows = predict(s);
  CHECK(rows[0].forward_scale == doctest::Approx(2.0));  // fan_in 144 * 2/144
  CHECK(rows[1].preactivation_variance == doctest::Approx(2.0));  // 2 * E[relu(sqrt(2) z)^2]
  CHECK(rows[0].chi == doctest::Approx(1.0));  // fan_out 288 == fan_in 288 for layer 2
  CHECK_FALSE(s[0].dense);
}

TEST_CASE("bad input to the predictions and the maps is refused with a message naming the argument") {
  using kindling_test::message_of;
  CHECK(mentions(message_of<std::invalid_argument>([] { predict(layer_stack(4)); }), "no layers"));
  CHECK(mentions(message_of<std::domain_error>([] { length_map(activation::tanh(), -1.0, 1.0, 0.0); }), "'q' = -1"));
  CHECK(mentions(message_of<std::domain_error>([] { length_fixed_point(activation::tanh(), 1.0, -2.0); }), "'sigma_b2' = -2"));
  CHECK(mentions(message_of<std::domain_error>([] {
                   layer_stack s(4);
                   predict(s.add_dense(3, activation::relu(), he_normal{}), {0.5, 1.0});
                 }),
                 "'options.warn_factor' = 0.5"));
  // exp(x^2) has E[phi(x)^2] = infinity for Var x >= 1/4.
  const nonlinearity wild = nonlinearity::custom("exp_square", [](double x) { return std::exp(x * x); },
                                                 [](double x) { return 2 * x * std::exp(x * x); });
  CHECK(mentions(message_of<std::domain_error>([&] {
                   layer_stack s(4);
                   predict(s.add_dense(3, wild, he_normal{}));
                 }),
                 "does not exist"));
}
