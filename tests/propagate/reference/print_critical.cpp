// Prints tanh critical points for tests/propagate/check_critical.py.
// Not a doctest file: reference/ is outside the glob of tests/CMakeLists.txt, so this
// program keeps its own main (built by kindling_reference_check).
#include <cstdio>
#include "kindling/propagate/criticality.hpp"

int main() {
  for (double sb2 : {0.0, 0.001, 0.01, 0.05, 0.1, 0.2, 0.5, 1.0, 2.0}) {
    const kindling::critical_point c = kindling::find_critical_point(kindling::activation::tanh(), sb2);
    std::printf("critical tanh %.17g %d %.17g %.17g\n", sb2, c.exists ? 1 : 0, c.weight_variance,
                c.fixed_point);
  }
  return 0;
}
