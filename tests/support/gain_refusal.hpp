// Test-side helper shared by the scheme tests: a scheme with a gain refuses every
// non-finite one (NaN, +inf, -inf) with std::domain_error naming the scheme and the
// argument, the core's message style (detail/error.hpp).
#ifndef KINDLING_TESTS_SUPPORT_GAIN_REFUSAL_HPP
#define KINDLING_TESTS_SUPPORT_GAIN_REFUSAL_HPP

#include <limits>
#include <stdexcept>
#include <string>

#include <doctest/doctest.h>

#include "errors.hpp"

namespace kindling_test {

// `initialize_with(gain)` writes a weight with the scheme called `scheme` (its name
// without the namespace, e.g. "orthogonal") at that gain; each call must throw.
template <class InitializeWith>
void check_non_finite_gains_refused(const std::string& scheme, InitializeWith initialize_with) {
  for (double gain : {std::numeric_limits<double>::quiet_NaN(), std::numeric_limits<double>::infinity(),
                      -std::numeric_limits<double>::infinity()}) {
    CAPTURE(gain);
    const std::string m = message_of<std::domain_error>([&] { initialize_with(gain); });
    CHECK_MESSAGE(mentions(m, "kindling::" + scheme + ": argument 'gain'"), m);
  }
}

}  // namespace kindling_test

#endif  // KINDLING_TESTS_SUPPORT_GAIN_REFUSAL_HPP
