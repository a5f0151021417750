# Critical points of tanh networks checked live against scipy (Debian python3-scipy,
# /usr/bin/python3): a tiny program prints kindling's critical sigma_w^2 and q* for
# several sigma_b^2, and tests/propagate/check_critical.py recomputes them with
# scipy.integrate.quad and scipy.optimize.brentq.  The program's source is written
# here because a .cpp in tests/propagate/ is globbed into kindling_test_propagate.
set(_kindling_pr_source ${CMAKE_CURRENT_BINARY_DIR}/kindling_propagate_print.cpp)
file(WRITE ${_kindling_pr_source} [=[
// Prints tanh critical points for tests/propagate/check_critical.py.
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
]=])
add_executable(kindling_propagate_print ${_kindling_pr_source})
target_link_libraries(kindling_propagate_print PRIVATE kindling kindling_warnings)
if(TARGET kindling_test_propagate)
  add_dependencies(kindling_test_propagate kindling_propagate_print)
endif()

add_test(NAME "propagate: tanh critical points match scipy quad and brentq"
         COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/propagate/check_critical.py
                 $<TARGET_FILE:kindling_propagate_print>)
