// A check shared by the propagation tests: every row of a measured table agrees, the
// table printed when one does not.
#ifndef KINDLING_TESTS_PROPAGATE_AGREEMENT_HPP
#define KINDLING_TESTS_PROPAGATE_AGREEMENT_HPP

#include <doctest/doctest.h>

#include "kindling/propagate/measure.hpp"

namespace kindling_test {
inline void check_every_row_agrees(const kindling::propagation_report& r) {
  for (std::size_t l = 0; l < r.layers.size(); ++l) {
    CAPTURE(l);
    INFO(r.table());
    CHECK(r.layers[l].agrees);
  }
}
}  // namespace kindling_test

#endif  // KINDLING_TESTS_PROPAGATE_AGREEMENT_HPP
