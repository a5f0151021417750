// kindling/audit/detail/tally.hpp: one pass over a view that the conformance checks
// read instead of a copy of the tensor. It counts the values into the bins of a grid
// (value_grid), sums their distance from a shift and its square (for the mean and
// variance; the kurtosis a failure report quotes takes a second pass), and notes non-finite values and values outside the declared bounds.
//
// Memory: one count per bin (the grid has at most 2^16 + 2 bins, 512 KiB), plus a 32-bit
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
#include <utility>
#include <vector>

#include "../../element.hpp"
#include "../../fill.hpp"
#include "../../random/detail/instruction_set.hpp"
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

  // Written without branches, so that a loop of them vectorizes: 1 + floor(t) with t
  // clamped to [0, count - 1] equals min(count, 1 + floor(t)) for t >= 0.
  std::uint32_t bin(double x) const noexcept {
    const double t = std::min(std::max((x - lo) * inv_width, 0.0), static_cast<double>(count - 1));
    std::uint32_t b = 1 + static_cast<std::uint32_t>(t);
    b = x >= lo ? b : 0u;  // NaN too (never asked: non-finite values are not binned)
    return x >= hi ? count + 1 : b;
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
    // The distance in unsigned arithmetic: from a negative lo to a positive hi it
    // exceeds the range of a signed 64-bit integer.
    const auto gap = [&] { return static_cast<std::uint64_t>(at) - static_cast<std::uint64_t>(below); };
    while (gap() > 1) {
      const std::int64_t mid = static_cast<std::int64_t>(static_cast<std::uint64_t>(below) + gap() / 2);
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
  double sum1 = 0, sum2 = 0;  // x - shift and its square
  double sum3 = 0, sum4 = 0;  // third and fourth powers: filled in by add_higher_sums
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

/// Calls f(row, step, n, first) for the rows of v's region that hold local row-major
/// indices [begin, end): n values from `row`, `step` elements apart, the first of them
/// local index `first`; an odometer between rows, no division per value.
template <class E, class F>
void for_each_row(const strided_view<E>& v, std::uint64_t begin, std::uint64_t end, F&& f) {
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
    f(v.data() + offset, step, run, i);
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

/// Calls f(x, local) for each value of v's region with local row-major index in
/// [begin, end), x its exact value as a double.
template <class E, class F>
void for_each_value(const strided_view<E>& v, std::uint64_t begin, std::uint64_t end, F&& f) {
  using element = std::remove_const_t<E>;
  for_each_row(v, begin, end, [&](const E* row, std::ptrdiff_t step, std::uint64_t n, std::uint64_t first) {
    for (std::uint64_t k = 0; k < n; ++k) {
      f(element_traits<element>::to_double(row[static_cast<std::ptrdiff_t>(k) * step]), first + k);
    }
  });
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

// The sums and bins of one stretch of values in memory (n values, step apart): the hot
// loop of the pass, with everything in locals so that the stores into the bins do not
// force the sums back to memory; values in pairs, with an accumulator for each of the
// pair, to halve the add chains. Values that are not finite or lie outside
// [inside_lo, inside_hi] (the bounds, made closed and finite) go to `slow` as well.
template <class E, class Slow>
void tally_stretch(const E* p, std::ptrdiff_t step, std::uint64_t n, std::uint64_t first, const value_grid& grid,
                   double shift, double inside_lo, double inside_hi, std::uint32_t* bins, chunk_tally& out,
                   Slow&& slow) {
  using element = std::remove_const_t<E>;
  const value_grid g = grid;  // a local copy: the stores into the bins cannot alias its count
  // A value the fast test lets through is finite and inside; the others go to `slow`
  // and, when finite, are counted like the rest.
  const auto usable = [&](double x, std::uint64_t at) {
    if (x >= inside_lo && x <= inside_hi) return true;
    slow(x, at);
    return static_cast<bool>(std::isfinite(x));
  };
  double s1a = 0, s1b = 0, s2a = 0, s2b = 0;
  std::uint64_t k = 0;
  for (; k + 2 <= n; k += 2) {
    const double x = element_traits<element>::to_double(p[static_cast<std::ptrdiff_t>(k) * step]);
    const double y = element_traits<element>::to_double(p[static_cast<std::ptrdiff_t>(k + 1) * step]);
    if (usable(x, first + k)) {
      ++bins[g.bin(x)];
      s1a += x - shift;
      s2a += (x - shift) * (x - shift);
    }
    if (usable(y, first + k + 1)) {
      ++bins[g.bin(y)];
      s1b += y - shift;
      s2b += (y - shift) * (y - shift);
    }
  }
  if (k < n) {
    const double x = element_traits<element>::to_double(p[static_cast<std::ptrdiff_t>(k) * step]);
    if (usable(x, first + k)) {
      ++bins[g.bin(x)];
      s1a += x - shift;
      s2a += (x - shift) * (x - shift);
    }
  }
  out.sum1 += s1a + s1b;
  out.sum2 += s2a + s2b;
}

/// Notes value x at local index i when it is not finite or lies outside the bounds.
inline void note_exception(double x, std::uint64_t i, const element_bounds& bounds, chunk_tally& p) {
  if (!std::isfinite(x)) {
    if (p.non_finite++ == 0) {
      p.first_non_finite = i;
      p.first_non_finite_value = x;
    }
    if (std::isnan(x)) ++p.nan_count;
    return;
  }
  if (side_of(x, bounds) == 0) return;
  const double excess = std::max(bounds.lo - x, x - bounds.hi);
  if (p.outside++ == 0 || excess > p.farthest_excess) {
    p.farthest_excess = excess;
    p.farthest = x;
    p.farthest_at = i;
  }
}

// Task s of `tasks`: body(c, begin, end) for its chunks c = s, s + tasks, ... of n
// values (values [begin, end)), and flush() after every 2^31 values, before a task's
// 32-bit counts could wrap, and at the end.
template <class Flush, class Body>
void for_task_chunks(std::size_t s, std::size_t tasks, std::uint64_t n, Flush&& flush, Body&& body) {
  const std::uint64_t chunks = (n + audit_chunk_elements - 1) / audit_chunk_elements;
  std::uint64_t since_flush = 0;
  for (std::uint64_t c = s; c < chunks; c += tasks) {
    const std::uint64_t begin = c * audit_chunk_elements, end = std::min(n, begin + audit_chunk_elements);
    body(c, begin, end);
    since_flush += end - begin;
    if (since_flush >= (std::uint64_t{1} << 31)) {
      flush();
      since_flush = 0;
    }
  }
  flush();
}

/// One pass over v: bins of `grid`, sums of x - shift and its square, non-finite values
/// and values outside `bounds`, on executor exec.
template <class E, class Exec>
value_tally tally_values(const strided_view<E>& v, const value_grid& grid, double shift, const element_bounds& bounds,
                         const Exec& exec) {
  value_tally t;
  t.n = v.size();
  t.counts.assign(std::size_t{grid.count} + 2, 0);
  const std::uint64_t chunks = (t.n + audit_chunk_elements - 1) / audit_chunk_elements;
  const std::size_t tasks = static_cast<std::size_t>(std::min<std::uint64_t>(chunks, audit_task_count(exec)));
  std::vector<chunk_tally> parts(static_cast<std::size_t>(chunks));
  const double big = std::numeric_limits<double>::max(), inf = std::numeric_limits<double>::infinity();
  const double inside_lo = std::max(-big, bounds.lo_open ? std::nextafter(bounds.lo, inf) : bounds.lo);
  const double inside_hi = std::min(big, bounds.hi_open ? std::nextafter(bounds.hi, -inf) : bounds.hi);
  std::mutex merge;
  const std::function<void(std::size_t)> task = [&](std::size_t s) {
    std::vector<std::uint32_t> local(t.counts.size(), 0);  // 32 bits: flushed before it could wrap
    const auto flush = [&] {
      std::lock_guard<std::mutex> lock(merge);
      for (std::size_t b = 0; b < local.size(); ++b) t.counts[b] += local[b];
      std::fill(local.begin(), local.end(), 0u);
    };
    for_task_chunks(s, tasks, t.n, flush, [&](std::uint64_t c, std::uint64_t begin, std::uint64_t end) {
      chunk_tally& p = parts[static_cast<std::size_t>(c)];
      const auto slow = [&p, &bounds](double x, std::uint64_t i) { note_exception(x, i, bounds, p); };
      for_each_row(v, begin, end, [&](const E* row, std::ptrdiff_t step, std::uint64_t n, std::uint64_t first) {
        tally_stretch(row, step, n, first, grid, shift, inside_lo, inside_hi, local.data(), p, slow);
      });
    });
  };
  exec(tasks, task);
  for (const chunk_tally& p : parts) t.totals.add(p);
  return t;
}

/// Element types of 16 bits are counted by bit pattern instead: 65536 counts hold the
/// whole sample, so the sums, the bounds and the Kolmogorov–Smirnov statistic against
/// the stored (discrete) distribution all come from the counts exactly, and the pass
/// is one load and one increment a value. float is counted by the top 16 bits of its
/// pattern (sign, exponent, 7 bits of the significand): the floats of one key form an
/// interval of relative width at most 2^-7, whose ends are exact floats, so the counts
/// are a grid whose edges are exact points of the stored CDF; its sums and bounds come
/// from a second, vectorizable loop over the same chunk while it is in cache.
template <class E>
constexpr bool counted_by_pattern =
    (sizeof(E) == 2 && std::is_trivially_copyable<E>::value) || std::is_same<E, float>::value;

/// What a pattern count pass returns: the count of each key, and for float the sums of
/// x - shift and its square (in fixed chunks, added in chunk order), the smallest and
/// largest value (NaNs aside) and the number of values whose keys hold the infinities
/// and NaNs.
struct pattern_tally {
  std::vector<std::uint64_t> counts;
  double sum1 = 0, sum2 = 0;
  double lo = std::numeric_limits<double>::infinity(), hi = -std::numeric_limits<double>::infinity();
  std::uint64_t non_finite = 0;
};

// The sums and extremes of the n floats from p (step apart). Contiguous values go in
// blocks of 256, 16 a lane summed in float around `shift` (rounded to float), each
// block's lane sums then added into double lane sums: the loops have no branch and
// vectorize, and 16 float additions a lane round by at most 2^-20 of the block's
// absolute sum, far below what the checks can see. NaNs are left out of the extremes
// (x < lo is false for them) and counted by their keys. The caller corrects for the
// rounded shift.
// The whole blocks of float_stretch from p[0] on, contiguous; returns how many values
// they hold. Inlined into each caller, so the AVX2 caller below vectorizes it with
// eight-float vectors: the same operations lane by lane (no fused multiply-add), so the
// same sums bit for bit whichever runs.
#if defined(__GNUC__)
__attribute__((always_inline))
#endif
inline std::uint64_t float_stretch_blocks(const float* p, std::uint64_t n, float shift, pattern_tally& out) {
  constexpr std::size_t lanes = 16, block = 256;
  std::uint64_t k = 0;
  float lo[lanes], hi[lanes];
  double d1[lanes] = {}, d2[lanes] = {};
  for (std::size_t l = 0; l < lanes; ++l) lo[l] = std::numeric_limits<float>::infinity(), hi[l] = -lo[l];
  for (; k + block <= n; k += block) {
    float s1[lanes] = {}, s2[lanes] = {};
    for (std::size_t i = 0; i < block; i += lanes) {
      for (std::size_t l = 0; l < lanes; ++l) {
        const float x = p[k + i + l], d = x - shift;
        s1[l] += d;
        s2[l] += d * d;
        lo[l] = x < lo[l] ? x : lo[l];
        hi[l] = hi[l] < x ? x : hi[l];
      }
    }
    for (std::size_t l = 0; l < lanes; ++l) d1[l] += static_cast<double>(s1[l]), d2[l] += static_cast<double>(s2[l]);
  }
  for (std::size_t l = 0; l < lanes; ++l) {
    out.sum1 += d1[l], out.sum2 += d2[l];
    out.lo = std::min<double>(out.lo, lo[l]), out.hi = std::max<double>(out.hi, hi[l]);
  }
  return k;
}

#if defined(KINDLING_LANES_X86)
__attribute__((target("avx2"))) inline std::uint64_t float_stretch_blocks_avx2(const float* p, std::uint64_t n, float shift,
                                                                               pattern_tally& out) {
  return float_stretch_blocks(p, n, shift, out);
}
#endif

inline void float_stretch(const float* p, std::ptrdiff_t step, std::uint64_t n, float shift, pattern_tally& out) {
  std::uint64_t k = 0;
  if (step == 1 && n >= 256) {
#if defined(KINDLING_LANES_X86)
    k = instruction_set_available(instruction_set::avx2) ? float_stretch_blocks_avx2(p, n, shift, out)
                                                          : float_stretch_blocks(p, n, shift, out);
#else
    k = float_stretch_blocks(p, n, shift, out);
#endif
  }
  for (; k < n; ++k) {
    const float x = p[static_cast<std::ptrdiff_t>(k) * step];
    const double d = static_cast<double>(x - shift);
    out.sum1 += d;
    out.sum2 += d * d;
    if (x < out.lo) out.lo = x;
    if (x > out.hi) out.hi = x;
  }
}

/// The count of each key among v's values (16-bit patterns, or float's top 16 bits), and
/// for float the sums around `shift`, on executor exec.
template <class E, class Exec>
pattern_tally count_patterns(const strided_view<E>& v, double shift, const Exec& exec) {
  using element = std::remove_const_t<E>;
  constexpr bool is_float = std::is_same<element, float>::value;
  using word = std::conditional_t<is_float, std::uint32_t, std::uint16_t>;
  constexpr int key_shift = is_float ? 16 : 0;
  static_assert(sizeof(word) == sizeof(element), "count_patterns keys 16-bit types and float");
  pattern_tally out;
  out.counts.assign(std::size_t{1} << 16, 0);
  const std::uint64_t n = v.size();
  const std::uint64_t chunks = (n + audit_chunk_elements - 1) / audit_chunk_elements;
  const std::size_t tasks = static_cast<std::size_t>(std::min<std::uint64_t>(chunks, audit_task_count(exec)));
  std::vector<pattern_tally> parts(is_float ? static_cast<std::size_t>(chunks) : 0);
  const float shift_f = static_cast<float>(shift);
  std::mutex merge;
  const std::function<void(std::size_t)> task = [&](std::size_t s) {
    // Two sets of 32-bit counts (flushed before they could wrap), alternate values to
    // each: a run of equal values then does not wait on its own increments.
    std::vector<std::uint32_t> local(out.counts.size(), 0), local2(out.counts.size(), 0);
    const auto flush = [&] {
      std::lock_guard<std::mutex> lock(merge);
      for (std::size_t b = 0; b < local.size(); ++b) out.counts[b] += std::uint64_t{local[b]} + local2[b];
      std::fill(local.begin(), local.end(), 0u);
      std::fill(local2.begin(), local2.end(), 0u);
    };
    std::uint32_t* bins = local.data();
    std::uint32_t* bins2 = local2.data();
    for_task_chunks(s, tasks, n, flush, [&](std::uint64_t c, std::uint64_t begin, std::uint64_t end) {
      for_each_row(v, begin, end, [&](const E* row, std::ptrdiff_t step, std::uint64_t count, std::uint64_t) {
        const unsigned char* bytes = reinterpret_cast<const unsigned char*>(row);
        const std::ptrdiff_t stride = step * static_cast<std::ptrdiff_t>(sizeof(word));
        constexpr std::size_t per_load = 8 / sizeof(word);
        std::uint64_t k = 0;
        if (step == 1) {  // several keys a load: the loop is bound by its memory operations
          for (; k + per_load <= count; k += per_load) {
            std::uint64_t w;
            std::memcpy(&w, bytes + sizeof(word) * k, sizeof w);
            word b[per_load];
            std::memcpy(b, &w, sizeof b);
            for (std::size_t i = 0; i < per_load; i += 2) {
              ++bins[b[i] >> key_shift];
              ++bins2[b[i + 1] >> key_shift];
            }
          }
        }
        for (; k < count; ++k) {
          word b;
          std::memcpy(&b, bytes + static_cast<std::ptrdiff_t>(k) * stride, sizeof b);
          ++bins[b >> key_shift];
        }
        if constexpr (is_float) float_stretch(row, step, count, shift_f, parts[static_cast<std::size_t>(c)]);
      });
    });
  };
  exec(tasks, task);
  if constexpr (is_float) {
    // The keys of the infinities and NaNs: exponent all ones.
    for (std::uint32_t key : {0x7F80u, 0xFF80u}) {
      for (std::uint32_t k = key; k < key + 0x80u; ++k) out.non_finite += out.counts[k];
    }
    for (const pattern_tally& p : parts) {
      out.sum1 += p.sum1, out.sum2 += p.sum2;
      out.lo = std::min(out.lo, p.lo), out.hi = std::max(out.hi, p.hi);
    }
    // Around the rounded shift, then moved to `shift`: sum (d + delta) and sum (d + delta)^2
    // with delta = shift_f - shift and d = x - shift_f (only used when every value is finite).
    const double delta = static_cast<double>(shift_f) - shift, rn = static_cast<double>(n);
    out.sum2 += 2 * delta * out.sum1 + rn * delta * delta;
    out.sum1 += rn * delta;
  }
  return out;
}

/// The value of 16-bit pattern b in element type E.
template <class E>
double pattern_value(std::uint16_t b) {
  E x;
  std::memcpy(static_cast<void*>(&x), &b, sizeof x);  // trivially copyable, not trivial (Eigen's types)
  return element_traits<E>::to_double(x);
}

/// The tally of a view from its pattern counts: the sums over the finite values (for
/// 16-bit types all four powers, from the counts; for float the first two, from the
/// pass), the counts of non-finite values and of values outside `bounds`; where and
/// what the first non-finite and the farthest outside value are takes a second pass
/// over v, made only when there are some. `counts` is left empty: the caller keeps the
/// pattern counts.
template <class E>
value_tally tally_from_patterns(const strided_view<E>& v, const pattern_tally& patterns, double shift,
                                const element_bounds& bounds) {
  using element = std::remove_const_t<E>;
  value_tally t;
  t.n = v.size();
  chunk_tally& c = t.totals;
  bool exceptions = false;
  if constexpr (std::is_same<element, float>::value) {
    c.sum1 = patterns.sum1;
    c.sum2 = patterns.sum2;
    exceptions = patterns.non_finite != 0 || (t.n != 0 && (!std::isfinite(patterns.lo) || !std::isfinite(patterns.hi) ||
                                                          side_of(patterns.lo, bounds) != 0 ||
                                                          side_of(patterns.hi, bounds) != 0));
  } else {
    const std::vector<std::uint64_t>& counts = patterns.counts;
    for (std::size_t b = 0; b < counts.size(); ++b) {
      if (counts[b] == 0) continue;
      const double k = static_cast<double>(counts[b]);
      const double x = pattern_value<element>(static_cast<std::uint16_t>(b));
      if (!std::isfinite(x) || side_of(x, bounds) != 0) {
        exceptions = true;
        if (!std::isfinite(x)) continue;
      }
      const double d = x - shift, d2 = d * d;
      c.sum1 += k * d;
      c.sum2 += k * d2;
      c.sum3 += k * d2 * d;
      c.sum4 += k * d2 * d2;
    }
  }
  if (exceptions) {  // the counts and positions, by the same rule as tally_values
    chunk_tally where;
    for_each_value(v, 0, t.n, [&](double x, std::uint64_t i) { note_exception(x, i, bounds, where); });
    c.non_finite = where.non_finite;
    c.nan_count = where.nan_count;
    c.first_non_finite = where.first_non_finite;
    c.first_non_finite_value = where.first_non_finite_value;
    c.outside = where.outside;
    c.farthest = where.farthest;
    c.farthest_at = where.farthest_at;
    c.farthest_excess = where.farthest_excess;
  }
  return t;
}

/// The 65536 keys of float in the order of their values, as bins of the real line:
/// position q < 2^15 holds the negative key of magnitude 2^15 - 1 - q, position
/// 2^15 + k the positive key k. below(q) is the probability, under `stored`, of the
/// values in the bins before position q: for a positive bin P(S < its least float),
/// for a negative bin P(S <= -(the magnitude one key up)); between -0's bin and +0's
/// it is P(S < 0) (the bin (-2^-133, -0] holds -0, whose probability under any declared
/// distribution is below 1e-38).
inline std::uint32_t float_key_position(std::uint32_t key) noexcept {
  return key >= 0x8000u ? 0xFFFFu - key : 0x8000u + key;
}

template <class Stored>
double float_below_position(const Stored& stored, std::uint32_t q) {
  const auto at = [](std::uint32_t magnitude_key) {
    float f;
    const std::uint32_t bits = magnitude_key << 16;
    std::memcpy(&f, &bits, sizeof f);
    return static_cast<double>(f);
  };
  constexpr std::uint32_t infinity_key = 0x7F80u;  // the keys from here on hold no finite float
  if (q >= 0x8000u) return q - 0x8000u >= infinity_key ? 1.0 : stored.below(at(q - 0x8000u));
  const std::uint32_t magnitude = 0x7FFFu - q;  // the key of the bin at q; the ones before are larger
  return magnitude + 1 >= infinity_key ? 0.0 : stored.at_most_value(-at(magnitude + 1));
}

/// The distinct finite values among the 65536 pattern counts of a 16-bit type, in
/// increasing order, with their counts (-0 and +0 are one value). No sort: the types are
/// sign-magnitude (IEEE 754 layout), so the negative patterns from the largest magnitude
/// down, then zero, then the positive ones upwards are already the order of the line.
template <class E>
std::vector<std::pair<double, std::uint64_t>> distinct_values(const std::vector<std::uint64_t>& patterns) {
  using element = std::remove_const_t<E>;
  static_assert(sizeof(element) == 2, "distinct_values walks the patterns of a 16-bit type");
  std::vector<std::pair<double, std::uint64_t>> values;
  const auto add = [&](std::uint32_t b) {
    if (patterns[b] == 0) return;
    const double x = pattern_value<element>(static_cast<std::uint16_t>(b));
    if (std::isfinite(x)) values.emplace_back(x, patterns[b]);
  };
  for (std::uint32_t m = 0x7FFFu; m >= 1; --m) add(0x8000u | m);
  if (const std::uint64_t zeros = patterns[0] + patterns[0x8000u]; zeros != 0) values.emplace_back(0.0, zeros);
  for (std::uint32_t m = 1; m <= 0x7FFFu; ++m) add(m);
  return values;
}

/// Sums of the third and fourth powers of x - shift over v's finite values, in fixed
/// chunks added in order (only when a report needs the kurtosis: a second pass).
template <class E>
void add_higher_sums(const strided_view<E>& v, double shift, chunk_tally& totals) {
  totals.sum3 = totals.sum4 = 0;
  for (std::uint64_t begin = 0; begin < v.size(); begin += audit_chunk_elements) {
    double s3 = 0, s4 = 0;
    for_each_value(v, begin, std::min(v.size(), begin + audit_chunk_elements), [&](double x, std::uint64_t) {
      if (!std::isfinite(x)) return;
      const double d = x - shift, d2 = d * d;
      s3 += d2 * d;
      s4 += d2 * d2;
    });
    totals.sum3 += s3;
    totals.sum4 += s4;
  }
}

}  // namespace kindling::detail

#endif  // KINDLING_AUDIT_DETAIL_TALLY_HPP
