// A check shared by the attention and recurrent tests: a measured comparison run on the
// calling thread and on two threads gives the same bits in every draw, and its draws
// differ from each other (each draw has its own derived stream, not one stream reused).
#ifndef KINDLING_TESTS_PROPAGATE_SAME_DRAWS_HPP
#define KINDLING_TESTS_PROPAGATE_SAME_DRAWS_HPP

#include <cstddef>

#include <doctest/doctest.h>

#include "kindling/executor.hpp"

namespace kindling_test {
// `measure(executor)` runs the comparison on that executor and returns its report, of
// `trials` draws.  `differing` (a pointer to a member of a draw's moments) must differ
// between draws 0 and 1; it and every one of `more` must be equal, draw for draw, in the
// serial and the threaded report.
template <class Measure, class Differing, class... More>
void check_same_draws(Measure measure, std::size_t trials, Differing differing, More... more) {
  const auto a = measure(kindling::serial_executor{});
  const auto b = measure(kindling::thread_executor(2));
  REQUIRE(trials >= 2);
  REQUIRE(a.draws.size() == trials);
  REQUIRE(b.draws.size() == trials);
  for (std::size_t k = 0; k < trials; ++k) {
    std::size_t which = 0;  // the member's place in (differing, more...), for a failure message
    CAPTURE(k);
    CAPTURE(which);
    const auto same = [&](auto member) {
      CHECK(a.draws[k].*member == b.draws[k].*member);
      ++which;
    };
    same(differing);
    (same(more), ...);
  }
  CHECK(a.draws[0].*differing != a.draws[1].*differing);
}
}  // namespace kindling_test

#endif  // KINDLING_TESTS_PROPAGATE_SAME_DRAWS_HPP
