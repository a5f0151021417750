// Tests of audit/detail/tally.hpp: the grid's bins and edges, the one pass's counts
// and sums against a direct computation, and the counts by bit pattern (16-bit types
// and float) with their order on the line.
#include "kindling/audit/detail/tally.hpp"

#include "kindling/audit/detail/stored.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <utility>
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

TEST_CASE("16-bit values are counted by bit pattern: counts, sums and exceptions as a direct loop, on any executor") {
  std::vector<bfloat16> x(3 * 70000);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = round_to_bfloat16(static_cast<float>(std::sin(double(i)) * 3));
  x[5] = round_to_bfloat16(std::numeric_limits<float>::quiet_NaN());
  x[70001] = round_to_bfloat16(7.5f);  // outside the bounds below
  x[150000] = round_to_bfloat16(-7.75f);  // farther outside
  const element_bounds bounds{-3.1, 3.1, false, false};
  const strided_view<const bfloat16> v(x.data(), shape(3, 70000));
  const detail::pattern_tally p = detail::count_patterns(v, 0.5, serial_executor{});
  const detail::value_tally t = detail::tally_from_patterns(v, p, 0.5, bounds);
  std::uint64_t counted = 0;
  for (std::uint64_t c : p.counts) counted += c;
  CHECK(counted == x.size());  // every value, NaN included, in its pattern
  CHECK(t.totals.non_finite == 1);
  CHECK(t.totals.nan_count == 1);
  CHECK(t.totals.first_non_finite == 5);
  CHECK(t.totals.outside == 2);
  CHECK(t.totals.farthest == -7.75);
  CHECK(t.totals.farthest_at == 150000);
  double s1 = 0, s2 = 0;
  for (const bfloat16& b : x) {
    const double y = static_cast<double>(to_float(b));
    if (std::isfinite(y)) s1 += y - 0.5, s2 += (y - 0.5) * (y - 0.5);
  }
  CHECK(t.totals.sum1 == doctest::Approx(s1).epsilon(1e-12));
  CHECK(t.totals.sum2 == doctest::Approx(s2).epsilon(1e-12));
  CHECK(detail::count_patterns(v, 0.5, thread_executor(3)).counts == p.counts);
  // The distinct values, in order, with -0 and +0 as one.
  std::vector<bfloat16> zeros{round_to_bfloat16(0.0f), round_to_bfloat16(-0.0f), round_to_bfloat16(1.0f)};
  const auto distinct = detail::distinct_values<bfloat16>(
      detail::count_patterns(strided_view<const bfloat16>(zeros.data(), shape(3)), 0.0, serial_executor{}).counts);
  REQUIRE(distinct.size() == 2);
  CHECK(distinct[0] == std::pair<double, std::uint64_t>(0.0, 2));
  CHECK(distinct[1] == std::pair<double, std::uint64_t>(1.0, 1));
}

TEST_CASE_TEMPLATE("distinct values walked in pattern order are the sorted and merged finite values", E, bfloat16,
                   float16) {
  // Every one of the 65536 patterns present, each with its own count: the walk must give
  // what sorting the finite values and merging -0 with +0 gives.
  std::vector<std::uint64_t> counts(65536);
  for (std::size_t b = 0; b < counts.size(); ++b) counts[b] = b % 7 == 3 ? 0 : b + 1;
  std::vector<std::pair<double, std::uint64_t>> want;
  for (std::size_t b = 0; b < counts.size(); ++b) {
    const double x = detail::pattern_value<E>(static_cast<std::uint16_t>(b));
    if (counts[b] != 0 && std::isfinite(x)) want.emplace_back(x == 0 ? 0.0 : x, counts[b]);
  }
  std::sort(want.begin(), want.end());
  std::vector<std::pair<double, std::uint64_t>> merged;
  for (const auto& v : want) {
    if (!merged.empty() && merged.back().first == v.first) {
      merged.back().second += v.second;
    } else {
      merged.push_back(v);
    }
  }
  const auto got = detail::distinct_values<E>(counts);
  REQUIRE(got.size() == merged.size());
  for (std::size_t i = 0; i < got.size(); ++i) {
    CAPTURE(i);
    REQUIRE(got[i] == merged[i]);
  }
}

TEST_CASE("float keys are bins in the order of the line, and each edge splits the values as its probability says") {
  // Values on both sides of zero, at key boundaries, subnormal, and the largest floats.
  std::vector<float> x{0.0f, -0.0f, 1.0f, -1.0f, 1.0078125f, -1.0078125f, 1.0078124f, 0.0221f, -0.0221f, 3e-39f,
                       -3e-39f, 1e-45f, -1e-45f, 1e38f, -1e38f, 0.5f, -0.5f, 0.49999997f, -0.49999997f};
  const auto key = [](float f) {
    std::uint32_t b;
    std::memcpy(&b, &f, sizeof b);
    return b >> 16;
  };
  const auto lower = [](std::uint32_t magnitude_key) {
    const std::uint32_t b = magnitude_key << 16;
    float f;
    std::memcpy(&f, &b, sizeof f);
    return static_cast<double>(f);
  };
  for (float a : x) {
    for (float b : x) {
      if (a < b) CHECK(detail::float_key_position(key(a)) <= detail::float_key_position(key(b)));
    }
  }
  // Position q's edge: the values before it are those below the bin's least float
  // (positive bins) or at most minus the next magnitude up (negative bins).
  for (float a : x) {
    const std::uint32_t p = detail::float_key_position(key(a));
    for (std::uint32_t q : {0x4000u, 0x7F00u, 0x7FFFu, 0x8000u, 0x8001u, 0xBF80u, 0xC000u}) {
      // -0 sits in the bin (-2^-133, -0], before the edge at zero (the documented exception).
      const bool before = q == 0x8000u ? (a < 0 || (a == 0 && std::signbit(a)))
                          : q > 0x8000u ? static_cast<double>(a) < lower(q - 0x8000u)
                                        : static_cast<double>(a) <= -lower(0x7FFFu - q + 1);
      CHECK_MESSAGE((p < q) == before, "value " << a << " position " << p << " edge " << q);
    }
  }
  // Under a standard normal, the values before the bin of 1.0 have probability
  // Phi(1) = 0.8413447460685429 (scipy.stats.norm.cdf(1.0)); the values before the bin
  // of -1.0, (-1 - 2^-7, -1], are those at most -1 - 2^-7:
  // scipy.stats.norm.cdf(-1.0078125) = 0.1567722419316409.
  const detail::stored_distribution<float> s(detail::declare(dist::normal{0, 1}));
  CHECK(detail::float_below_position(s, detail::float_key_position(key(1.0f))) ==
        doctest::Approx(0.8413447460685429).epsilon(1e-7));
  CHECK(detail::float_below_position(s, detail::float_key_position(key(-1.0f))) ==
        doctest::Approx(0.1567722419316409).epsilon(1e-7));
  CHECK(detail::float_below_position(s, 0) == 0.0);
  CHECK(detail::float_below_position(s, 0xFFFFu) == 1.0);
}

TEST_CASE("float sums and extremes of the pattern pass match a direct loop, on any executor") {
  std::vector<float> x(3 * 70000 + 13);
  for (std::size_t i = 0; i < x.size(); ++i) x[i] = static_cast<float>(std::cos(double(i)) * 0.02 + 0.001);
  const strided_view<const float> v(x.data(), shape(x.size()));
  const detail::pattern_tally p = detail::count_patterns(v, 0.001, serial_executor{});
  double s1 = 0, s2 = 0, size = 0, lo = 1, hi = -1;
  for (float y : x) {
    const double d = static_cast<double>(y) - 0.001;
    s1 += d, s2 += d * d, size += std::fabs(d), lo = std::min<double>(lo, y), hi = std::max<double>(hi, y);
  }
  // The block sums in float round each value's distance by at most 2^-24 of it, and
  // their sums by a few such: far below the standard error the mean check allows.
  CHECK(p.sum1 == doctest::Approx(s1).epsilon(1e-7).scale(size));
  CHECK(p.sum2 == doctest::Approx(s2).epsilon(1e-6));
  CHECK(p.lo == lo);
  CHECK(p.hi == hi);
  CHECK(p.non_finite == 0);
  const detail::pattern_tally q = detail::count_patterns(v, 0.001, thread_executor(3));
  CHECK(q.counts == p.counts);
  CHECK(q.sum1 == p.sum1);
  CHECK(q.sum2 == p.sum2);
#if defined(KINDLING_LANES_X86)
  // The AVX2 form of the block sums (taken on CPUs that have it) gives the same bits as
  // the generic one, so the verdict does not depend on the CPU either.
  if (detail::instruction_set_available(detail::instruction_set::avx2)) {
    detail::pattern_tally generic, wide;
    CHECK(detail::float_stretch_blocks(x.data(), x.size(), 0.001f, generic) ==
          detail::float_stretch_blocks_avx2(x.data(), x.size(), 0.001f, wide));
    CHECK(generic.sum1 == wide.sum1);
    CHECK(generic.sum2 == wide.sum2);
    CHECK(generic.lo == wide.lo);
    CHECK(generic.hi == wide.hi);
  }
#endif
}
