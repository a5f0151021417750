// Prints Gauss-Hermite rules and computed gains for tests/detail/check_rules.py.
// Not a doctest file: reference/ is outside the glob of tests/CMakeLists.txt, so this
// program keeps its own main (built by kindling_reference_check).
#include <cstdio>
#include "kindling/gain.hpp"

int main() {
  for (std::size_t n : {1u, 2u, 3u, 5u, 10u, 20u, 33u, 50u, 64u, 100u, 128u, 150u, 200u}) {
    const auto rule = kindling::detail::gauss_hermite_rule(n);
    for (std::size_t i = 0; i < n; ++i) {
      std::printf("rule %zu %zu %.17g %.17g\n", n, i, rule.nodes[i], rule.weights[i]);
    }
  }
  using kindling::activation;
  for (const auto& a : {activation::identity(), activation::sigmoid(), activation::tanh(),
                        activation::relu(), activation::leaky_relu(0.1), activation::elu(),
                        activation::elu(0.5), activation::selu(), activation::gelu(),
                        activation::silu()}) {
    std::printf("gain %s %.17g %.17g %.17g %.17g\n", std::string(a.name()).c_str(),
                a.parameter(), kindling::forward_gain(a), kindling::backward_gain(a),
                kindling::table_gain(a).value);
  }
  return 0;
}
