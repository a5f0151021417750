// kindling/audit/detail/tally.hpp: one pass over a view that the conformance checks
// read instead of a copy of the tensor. It counts the values into the bins of a grid
// (value_grid), sums the powers of their distance from a shift (for the mean, variance
// and kurtosis), and notes non-finite values and values outside the declared bounds.
//
// Memory: one count per bin (the grid has at most 2^18 + 2 bins, 2 MiB), plus a 32-bit
// count per bin for each executor task while it runs; nothing proportional to the
// tensor. Any executor gives the same result bit for bit: the counts are integers, and
// the sums are formed per fixed chunk of audit_chunk_elements values (whatever the
// executor) and added in chunk order.
#ifndef KINDLING_AUDIT_DETAIL_TALLY_HPP
#define KINDLING_AUDIT_DETAIL_TALLY_HPP

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <functional>
#include <limits>
#include <mutex>
#include <type_traits>
#include <vector>

#include "../../element.hpp"
#include "../../fill.hpp"
#include "../../view.hpp"

namespace kindling::detail {

/// Values a conformance task reads as one unit of its sums; fixed, never derived from the thread count.
inline constexpr std::uint64_t audit_chunk_elements = 65536;

/// Bins of the real line: bin 0 is (-inf, lo), bins 1..count cut [lo, hi) into equal
/// widths, bin count + 1 is [hi, +inf). bin() is monotone in x, so each bin is an
/// interval and edge(j), the smallest double in bin j or above, is found exactly.
struct value_grid {
  double lo = 0, hi = 1, inv_width = 1;
  std::uint32_t count = 1;

  value_grid(double lo_, double hi_, std::uint32_t count_)
      : lo(lo_), hi(hi_), inv_width(static_cast<double>(count_) / (hi_ - lo_)), count(count_) {}

  std::uint32_t bin(double x) const noexcept {
    if (!(x >= lo)) return 0;
    if (x >= hi) return count + 1;
    const double k = (x - lo) * inv_width;
    return std::min(count, 1 + static_cast<std::uint32_t>(k));
  }

  /// The smallest double x with bin(x) >= j, for j in 1..count + 1: a bisection over
  /// the doubles in their order (64 steps at most; stepping one double at a time could
  /// cross the whole subnormal range near 0).
  double edge(std::uint32_t j) const {
    if (j <= 1) return lo;
    if (j > count) return hi;
    // Usually the boundary computed in exact arithmetic, or a neighbour, is it.
    const double guess = lo + static_cast<double>(j - 1) / inv_width;
    const double inf = std::numeric_limits<double>::infinity();
    if (guess > lo && guess < hi && bin(guess) >= j && bin(std::nextafter(guess, -inf)) < j) return guess;
    std::int64_t below = ordered(lo), at = ordered(hi);  // bin(below) < j <= bin(at)
    while (at - below > 1) {
      const std::int64_t mid = below + (at - below) / 2;
      (bin(from_ordered(mid)) >= j ? at : below) = mid;
    }
    return from_ordered(at);
  }

 private:
  // Doubles as integers in the order of the real line (-0 and +0 are both 0).
  static std::int64_t ordered(double x) noexcept {
    std::int64_t b;
    std::memcpy(&b, &x, sizeof b);
    return b >= 0 ? b : std::numeric_limits<std::int64_t>::min() - b;
  }
  static double from_ordered(std::int64_t k) noexcept {
    const std::int64_t b = k >= 0 ? k : std::numeric_limits<std::int64_t>::min() - k;
    double x;
    std::memcpy(&x, &b, sizeof x);
    return x;
  }
};

/// What one chunk of values adds up to. Indices are local: row-major in the view's region.
struct chunk_tally {
  double sum1 = 0, sum2 = 0, sum3 = 0, sum4 = 0;  // powers of x - shift
  std::uint64_t non_finite = 0, nan_count = 0, first_non_finite = 0;
  double first_non_finite_value = 0;
  std::uint64_t outside = 0, farthest_at = 0;  // values outside the bounds; the farthest
  double farthest = 0, farthest_excess = -1;

  // Adds a later chunk (so the earlier one's first and farthest win ties).
  void add(const chunk_tally& c) {
    sum1 += c.sum1;
    sum2 += c.sum2;
    sum3 += c.sum3;
    sum4 += c.sum4;
    if (non_finite == 0 && c.non_finite != 0) {
      first_non_finite = c.first_non_finite;
      first_non_finite_value = c.first_non_finite_value;
    }
    non_finite += c.non_finite;
    nan_count += c.nan_count;
    outside += c.outside;
    if (c.farthest_excess > farthest_excess) {
      farthest_excess = c.farthest_excess;
      farthest = c.farthest;
      farthest_at = c.farthest_at;
    }
  }
};

struct value_tally {
  std::uint64_t n = 0;
  std::vector<std::uint64_t> counts;  // per bin of the grid (finite values only)
  chunk_tally totals;
};

/// Calls f(x, local) for each value of v's region with local row-major index in
/// [begin, end), x its exact value as a double: a row at a time, an odometer between rows.
template <class E, class F>
void for_each_value(const strided_view<E>& v, std::uint64_t begin, std::uint64_t end, F&& f) {
  using element = std::remove_const_t<E>;
  const std::size_t r = v.rank();
  const shape& extent = v.part().extent();
  std::vector<std::uint64_t> at(r);
  std::uint64_t rest = begin;
  std::ptrdiff_t offset = 0;
  for (std::size_t d = r; d-- > 0;) {
    at[d] = rest % extent[d];
    rest /= extent[d];
    offset += static_cast<std::ptrdiff_t>(at[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
  }
  const std::ptrdiff_t step = static_cast<std::ptrdiff_t>(v.stride(r - 1));
  for (std::uint64_t i = begin; i < end;) {
    const std::uint64_t run = std::min(extent[r - 1] - at[r - 1], end - i);
    const E* row = v.data() + offset;
    for (std::uint64_t k = 0; k < run; ++k) {
      f(element_traits<element>::to_double(row[static_cast<std::ptrdiff_t>(k) * step]), i + k);
    }
    i += run;
    offset += static_cast<std::ptrdiff_t>(run) * step;
    at[r - 1] += run;
    for (std::size_t d = r - 1; d > 0 && at[d] == extent[d]; --d) {  // carry into the outer axes
      offset -= static_cast<std::ptrdiff_t>(extent[d]) * static_cast<std::ptrdiff_t>(v.stride(d));
      at[d] = 0;
      offset += static_cast<std::ptrdiff_t>(v.stride(d - 1));
      ++at[d - 1];
    }
  }
}

/// The global row-major flat index of local index `local` of v's region.
template <class E>
std::uint64_t global_flat_index(const strided_view<E>& v, std::uint64_t local) {
  const std::size_t r = v.rank();
  std::vector<std::uint64_t> at(r);
  for (std::size_t d = r; d-- > 0;) {
    at[d] = local % v.part().extent()[d];
    local /= v.part().extent()[d];
  }
  std::uint64_t flat = 0;
  for (std::size_t d = 0; d < r; ++d) flat = flat * v.global_shape()[d] + v.part().offset()[d] + at[d];
  return flat;
}

// How many tasks to run the bins on: one per thread the executor has, or a few when it
// does not say. Only memory and speed depend on it, never the result.
template <class Exec>
std::size_t audit_task_count(const Exec&) noexcept {
  return 4;
}
inline std::size_t audit_task_count(const serial_executor&) noexcept { return 1; }
inline std::size_t audit_task_count(const thread_executor& e) noexcept { return e.threads(); }

/// One pass over v: bins of `grid`, sums of powers of x - shift, non-finite values and
/// values outside `bounds`, on executor exec.
template <class E, class Exec>
value_tally tally_values(const strided_view<E>& v, const value_grid& grid, double shift, const element_bounds& bounds,
                         const Exec& exec) {
  value_tally t;
  t.n = v.size();
  t.counts.assign(std::size_t{grid.count} + 2, 0);
  const std::uint64_t chunks = (t.n + audit_chunk_elements - 1) / audit_chunk_elements;
  const std::size_t tasks = static_cast<std::size_t>(std::min<std::uint64_t>(chunks, audit_task_count(exec)));
  std::vector<chunk_tally> parts(static_cast<std::size_t>(chunks));
  std::mutex merge;
  const std::function<void(std::size_t)> task = [&](std::size_t s) {
    std::vector<std::uint32_t> local(t.counts.size(), 0);  // 32 bits: flushed before it could wrap
    const auto flush = [&] {
      std::lock_guard<std::mutex> lock(merge);
      for (std::size_t b = 0; b < local.size(); ++b) t.counts[b] += local[b];
      std::fill(local.begin(), local.end(), 0u);
    };
    std::uint64_t since_flush = 0;
    for (std::uint64_t c = s; c < chunks; c += tasks) {
      chunk_tally& p = parts[static_cast<std::size_t>(c)];
      const std::uint64_t begin = c * audit_chunk_elements, end = std::min(t.n, begin + audit_chunk_elements);
      for_each_value(v, begin, end, [&](double x, std::uint64_t i) {
        if (!std::isfinite(x)) {
          if (p.non_finite++ == 0) {
            p.first_non_finite = i;
            p.first_non_finite_value = x;
          }
          if (std::isnan(x)) ++p.nan_count;
          return;
        }
        ++local[grid.bin(x)];
        const double d = x - shift, d2 = d * d;
        p.sum1 += d;
        p.sum2 += d2;
        p.sum3 += d2 * d;
        p.sum4 += d2 * d2;
        if (side_of(x, bounds) != 0) {
          const double excess = std::max(bounds.lo - x, x - bounds.hi);
          if (p.outside++ == 0 || excess > p.farthest_excess) {
            p.farthest_excess = excess;
            p.farthest = x;
            p.farthest_at = i;
          }
        }
      });
      since_flush += end - begin;
      if (since_flush >= (std::uint64_t{1} << 31)) {
        flush();
        since_flush = 0;
      }
    }
    flush();
  };
  exec(tasks, task);
  for (const chunk_tally& p : parts) t.totals.add(p);
  return t;
}

}  // namespace kindling::detail

#endif  // KINDLING_AUDIT_DETAIL_TALLY_HPP
