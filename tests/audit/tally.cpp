// Tests of audit/detail/tally.hpp: the grid's bins and edges, and the one pass's counts
// and sums against a direct computation.
#include "kindling/audit/detail/tally.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <limits>
#include <vector>

using namespace kindling;

TEST_CASE("every edge of a grid is the first double of its bin, across zero and far from it") {
  const double inf = std::numeric_limits<double>::infinity();
  for (const auto& g : {detail::value_grid(-16.5, 17.5, 1024), detail::value_grid(-1, 1, 4096),
                        detail::value_grid(1e-3, 2e-3, 1024), detail::value_grid(-5e8, -1e8, 2048)}) {
    for (std::uint32_t j = 1; j <= g.count + 1; ++j) {
      const double e = g.edge(j);
      CHECK(g.bin(e) >= j);
      CHECK(g.bin(std::nextafter(e, -inf)) < j);
    }
  }
}

TEST_CASE("the one pass counts every value once and sums them as a direct loop does") {
  std::vector<double> x(3 * 70000);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = std::sin(static_cast<double>(i)) * 3;  // spread over [-3, 3]
  x[5] = std::numeric_limits<double>::quiet_NaN();
  x[70001] = 7.5;  // outside the bounds below
  const detail::value_grid g(-3, 3, 1024);
  const element_bounds bounds{-3.1, 3.1, false, false};
  const strided_view<const double> v(x.data(), shape(3, 70000));
  const detail::value_tally t = detail::tally_values(v, g, 0.0, bounds, serial_executor{});
  std::uint64_t counted = 0;
  for (std::uint64_t c : t.counts) counted += c;
  CHECK(counted == x.size() - 1);  // all but the NaN
  CHECK(t.totals.non_finite == 1);
  CHECK(t.totals.first_non_finite == 5);
  CHECK(t.totals.outside == 1);
  CHECK(t.totals.farthest == 7.5);
  CHECK(t.totals.farthest_at == 70001);
  double sum = 0;
  for (double y : x) sum += std::isfinite(y) ? y : 0.0;
  CHECK(t.totals.sum1 == doctest::Approx(sum).epsilon(1e-12));
  // The same on threads, bit for bit.
  const detail::value_tally u = detail::tally_values(v, g, 0.0, bounds, thread_executor(3));
  CHECK(u.counts == t.counts);
  CHECK(u.totals.sum1 == t.totals.sum1);
  CHECK(u.totals.sum2 == t.totals.sum2);
}
