# Reference checks of fan_gain against numpy and scipy (Debian python3-numpy,
# python3-scipy run with /usr/bin/python3): a tiny program prints our Gauss-Hermite
# rules and computed gains, and tests/fan_gain/check_rules.py compares them with
# numpy.polynomial.hermite_e.hermegauss and scipy.integrate.quad.
#
# The program's source is written here (a .cpp in this folder would be globbed into
# kindling_test_fan_gain, which has its own main).
set(_kindling_fg_source ${CMAKE_CURRENT_BINARY_DIR}/kindling_fan_gain_print.cpp)
file(WRITE ${_kindling_fg_source} [=[
// Prints Gauss-Hermite rules and computed gains for tests/fan_gain/check_rules.py.
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
]=])
add_executable(kindling_fan_gain_print ${_kindling_fg_source})
target_link_libraries(kindling_fan_gain_print PRIVATE kindling kindling_warnings)
if(TARGET kindling_test_fan_gain)
  add_dependencies(kindling_test_fan_gain kindling_fan_gain_print)
endif()

add_test(NAME "fan_gain: Gauss-Hermite rules match numpy hermegauss and gains match scipy quad"
         COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/fan_gain/check_rules.py
                 $<TARGET_FILE:kindling_fan_gain_print>)
