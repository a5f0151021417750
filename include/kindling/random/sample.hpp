// Counter blocks -> values of a distribution, in the compute type (float or double).
//
// Reproducibility format version 1 (DEVELOPERS.md, "Element index and words",
// "Uniform variates", "Transforms"). The path of global logical element i:
//
//   W = 1 (float) or 2 (double) words per element, E = 4 / W elements per block,
//   groups of 16 blocks:  g = i / (16 E), r = i % (16 E), slot = r / 16, lane = r % 16,
//   block = 16 g + lane,  words w[slot W] .. w[slot W + W - 1] of s.block(domain, block).
//
//   u  = unit_uniform:       float (w >> 8) 2^-24;  double (((w_a << 32) | w_b) >> 11) 2^-53
//        in [0, 1), a multiple of 2^-24 / 2^-53 (every step exact).
//   uo = unit_uniform_open:  the same integer with its lowest bit set, times the same
//        power of two: an odd multiple of 2^-24 / 2^-53 in (0, 1), and so is 1 - uo.
//
// Transforms, in the compute type C with the parameters rounded to C (RNE):
//   uniform [lo, hi):      x = fma(hi - lo, u, lo); if x >= hi, x = the largest C below hi.
//   symmetric (-b, b):     v = fma(2, u, -1) + 2^-p (p = 24 or 53; exact, an odd multiple
//                          of 2^-p in (-1, 1), symmetric about 0); x = b v.
//   normal (m, s):         Box-Muller on slots (2k, 2k+1) of one block: u1 = u(slot 2k),
//                          u2 = u(slot 2k+1), r = sqrt(-2 log(1 - u1)) (1 - u1 exact,
//                          in (0, 1]), (sin, cos) = sincos_2pi(u2);
//                          slot 2k: fma(s, r cos, m), slot 2k+1: fma(s, r sin, m).
//   truncated normal (m, s, cut [a, b]): inversion, see truncated_normal_kernel below.
//
// log, sincos_2pi, Phi and Phi^-1 are kindling's own (detail/dmath.hpp), so the bits are
// the same under every compiler, flag set and CPU.
#ifndef KINDLING_RANDOM_SAMPLE_HPP
#define KINDLING_RANDOM_SAMPLE_HPP

#include <algorithm>
#include <cmath>
#include <cstddef>
#include <cstdint>
#include <limits>
#include <stdexcept>
#include <string>
#include <type_traits>

#include "kindling/detail/dmath.hpp"
#include "kindling/detail/error.hpp"
#include "kindling/element.hpp"
#include "kindling/random/detail/lanes.hpp"
#include "kindling/random/stream.hpp"

namespace kindling {

// ---- uniform variates ---------------------------------------------------------------

namespace detail {
template <class C>
inline constexpr unsigned words_per_element = std::is_same<C, double>::value ? 2u : 1u;
template <class C>
inline constexpr unsigned elements_per_block = 4u / words_per_element<C>;
template <class C>
inline constexpr std::uint64_t elements_per_group = 16u * elements_per_block<C>;

// The integer behind a variate of slot `slot`: 24 bits (float) or 53 bits (double).
template <class C>
inline std::uint64_t variate_bits(const philox4x32_counter& w, unsigned slot) noexcept {
  if constexpr (std::is_same<C, double>::value) {
    return ((std::uint64_t{w[2 * slot]} << 32) | w[2 * slot + 1]) >> 11;
  } else {
    return w[slot] >> 8;
  }
}
template <class C>
inline constexpr C variate_unit = std::is_same<C, double>::value ? C(0x1p-53) : C(0x1p-24);
}  // namespace detail

/// u in [0, 1) from slot `slot` of a block (DEVELOPERS.md "Uniform variates").
template <class C>
inline C unit_uniform(const philox4x32_counter& block, unsigned slot) noexcept {
  static_assert(std::is_same<C, float>::value || std::is_same<C, double>::value,
                "the compute type is float or double");
  return static_cast<C>(detail::variate_bits<C>(block, slot)) * detail::variate_unit<C>;
}

/// u in (0, 1), an odd multiple of 2^-24 (float) or 2^-53 (double): the integer of
/// unit_uniform with its lowest bit set. 1 - u is exact and has the same distribution.
template <class C>
inline C unit_uniform_open(const philox4x32_counter& block, unsigned slot) noexcept {
  static_assert(std::is_same<C, float>::value || std::is_same<C, double>::value,
                "the compute type is float or double");
  return static_cast<C>(detail::variate_bits<C>(block, slot) | 1u) * detail::variate_unit<C>;
}

// ---- distributions ------------------------------------------------------------------

namespace dist {

/// Uniform on [lo, hi).
struct uniform {
  double lo;
  double hi;
};
/// Uniform on (-bound, bound), symmetric about 0 bit for bit.
struct symmetric_uniform {
  double bound;
};
/// Normal with the given mean and standard deviation.
struct normal {
  double mean;
  double stddev;
};
/// The normal (mean, stddev) restricted to [mean + cut_lo stddev, mean + cut_hi stddev]:
/// cuts are in units of the underlying normal's stddev; cut_lo may be -inf and cut_hi
/// +inf (one side or both), and the interval must hold probability >= 2^-100 under the
/// standard normal (so that its tail probabilities are normal floats).
struct truncated_normal {
  double mean;
  double stddev;
  double cut_lo;
  double cut_hi;
};

}  // namespace dist

namespace detail {

[[noreturn]] inline void reject(const char* type, const char* field, double value,
                                const std::string& expected) {
  reject_argument<std::domain_error>(std::string("dist::") + type, field, argument_text(value), expected);
}

// Finite, and finite in float too (both compute types must be able to carry it).
inline void require_finite(const char* type, const char* field, double v) {
  if (!std::isfinite(v) || !std::isfinite(static_cast<float>(v)))
    reject(type, field, v, "a finite number (within the float range)");
}
inline void require_positive(const char* type, const char* field, double v) {
  require_finite(type, field, v);
  if (!(static_cast<float>(v) > 0.0f))
    reject(type, field, v, "a number > 0 (at least the smallest positive float)");
}

// The probability pieces of a standard normal truncated to [a, b], each computed from
// the tail it is small in so that none loses relative accuracy:
//   lower = Phi(a), upper = Phi(-b) = 1 - Phi(b), mass = Phi(b) - Phi(a).
struct cut_probabilities {
  double lower;
  double upper;
  double mass;
};

inline cut_probabilities cut_probabilities_of(double a, double b) noexcept {
  const double lower = normal_cdf(a);
  const double upper = normal_cdf(-b);
  double mass;
  if (b <= 0.0) {
    mass = normal_cdf(b) - lower;
  } else if (a >= 0.0) {
    mass = normal_cdf(-a) - upper;
  } else {
    mass = (0.5 - lower) + (0.5 - upper);
  }
  return {lower, upper, mass};
}

// The truncated normal's argument check: defined in the compiled library in that mode
// (detail/compiled_mode.hpp), since every file that names a fan-scaled scheme reaches it.
KINDLING_COMPILED_INLINE cut_probabilities validated_cuts(const char* type, double a, double b);
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE cut_probabilities validated_cuts(const char* type, double a, double b) {
  if (a != a || a == std::numeric_limits<double>::infinity())
    reject(type, "cut_lo", a, "a number or -inf, below cut_hi");
  if (b != b || b == -std::numeric_limits<double>::infinity())
    reject(type, "cut_hi", b, "a number or +inf, above cut_lo");
  if (!(a < b)) reject(type, "cut_hi", b, "a value greater than cut_lo = " + argument_text(a));
  const cut_probabilities c = cut_probabilities_of(a, b);
  if (!(c.mass >= 0x1p-100))
    reject(type, "cut_lo", a,
           "cuts [cut_lo, cut_hi] = [" + argument_text(a) + ", " + argument_text(b) +
               "] holding probability >= 2^-100 under the standard normal (it holds " +
               argument_text(c.mass) + ")");
  return c;
}
#endif

// One step below x (x finite, > lowest).
inline double next_below(double x) noexcept {
  return double_from_bits(step_down_bits<std::uint64_t>(bits_of(x), 0x8000000000000000u));
}
inline float next_below(float x) noexcept {
  return float_from_bits(step_down_bits<std::uint32_t>(bits_of(x), 0x80000000u));
}

// ---- the transforms, each a kernel: one counter block -> its E values ---------------
// prepare() validates and returns the kernel; a kernel's operator() writes the
// elements_per_block<C> values of one block, slot by slot.

template <class C>
struct uniform_kernel {
  using compute_type = C;
  C lo, width, hi, below_hi;  // below_hi: the largest C below hi
  void operator()(const philox4x32_counter& w, C* v) const noexcept {
    for (unsigned slot = 0; slot < elements_per_block<C>; ++slot) {
      const C x = std::fma(width, unit_uniform<C>(w, slot), lo);
      v[slot] = x >= hi ? below_hi : x;
    }
  }
};

template <class C>
struct symmetric_uniform_kernel {
  using compute_type = C;
  C bound;
  void operator()(const philox4x32_counter& w, C* v) const noexcept {
    for (unsigned slot = 0; slot < elements_per_block<C>; ++slot) {
      const C centred = std::fma(C(2), unit_uniform<C>(w, slot), C(-1)) + variate_unit<C>;
      v[slot] = bound * centred;
    }
  }
};

template <class C>
struct normal_kernel {
  using compute_type = C;
  C mean, stddev;
  void operator()(const philox4x32_counter& w, C* v) const noexcept {
    for (unsigned slot = 0; slot < elements_per_block<C>; slot += 2) {
      const C u1 = unit_uniform<C>(w, slot);
      const C u2 = unit_uniform<C>(w, slot + 1);
      const C r = std::sqrt(C(-2) * detail::log(C(1) - u1));
      const sin_cos<C> sc = sincos_2pi(u2);
      v[slot] = std::fma(stddev, r * sc.cos, mean);
      v[slot + 1] = std::fma(stddev, r * sc.sin, mean);
    }
  }
};

// Truncated normal by inversion, never a loop. With P = cut_probabilities_of(a, b)
// (in double, then rounded to C) and uo = unit_uniform_open:
//   p = fma(uo, mass, lower)                                       lower-tail probability
//   p <= 1/2:  z = Phi^-1(p)
//   p >  1/2:  z = -Phi^-1(fma(1 - uo, mass, upper))               the same point, from the
//                                                                  upper tail (accurate there)
//   z = min(max(z, a), b);  x = fma(s, z, m)
// Phi^-1 is AS 241 PPND16 for double and PPND7 for float.
template <class C>
struct truncated_normal_kernel {
  using compute_type = C;
  C mean, stddev, cut_lo, cut_hi, lower, upper, mass;
  void operator()(const philox4x32_counter& w, C* v) const noexcept {
    for (unsigned slot = 0; slot < elements_per_block<C>; ++slot) {
      const C uo = unit_uniform_open<C>(w, slot);
      const C p = std::fma(uo, mass, lower);
      C z = p <= C(0.5) ? normal_quantile(p) : -normal_quantile(std::fma(C(1) - uo, mass, upper));
      z = std::min(std::max(z, cut_lo), cut_hi);
      v[slot] = std::fma(stddev, z, mean);
    }
  }
};

template <class C>
uniform_kernel<C> prepare(const dist::uniform& d) {
  require_finite("uniform", "lo", d.lo);
  require_finite("uniform", "hi", d.hi);
  const C lo = static_cast<C>(d.lo), hi = static_cast<C>(d.hi);
  if (!(static_cast<float>(d.lo) < static_cast<float>(d.hi)))
    reject("uniform", "hi", d.hi,
           "a value greater than lo = " + argument_text(d.lo) + " (also after rounding to float)");
  if (!std::isfinite(d.hi - d.lo) || !std::isfinite(static_cast<float>(d.hi) - static_cast<float>(d.lo)))
    reject("uniform", "hi", d.hi, "hi - lo finite in float (lo = " + argument_text(d.lo) + ")");
  return {lo, hi - lo, hi, next_below(hi)};
}

template <class C>
symmetric_uniform_kernel<C> prepare(const dist::symmetric_uniform& d) {
  require_positive("symmetric_uniform", "bound", d.bound);
  return {static_cast<C>(d.bound)};
}

template <class C>
normal_kernel<C> prepare(const dist::normal& d) {
  require_finite("normal", "mean", d.mean);
  require_positive("normal", "stddev", d.stddev);
  return {static_cast<C>(d.mean), static_cast<C>(d.stddev)};
}

template <class C>
truncated_normal_kernel<C> prepare(const dist::truncated_normal& d) {
  require_finite("truncated_normal", "mean", d.mean);
  require_positive("truncated_normal", "stddev", d.stddev);
  const cut_probabilities c = validated_cuts("truncated_normal", d.cut_lo, d.cut_hi);
  return {static_cast<C>(d.mean),    static_cast<C>(d.stddev), static_cast<C>(d.cut_lo),
          static_cast<C>(d.cut_hi),  static_cast<C>(c.lower),  static_cast<C>(c.upper),
          static_cast<C>(c.mass)};
}

// The kernels the vector paths (random/detail/lanes.hpp) transcribe: every float
// kernel, and the double normal (AVX-512).
template <class Kernel>
struct has_vector_path : std::false_type {};
template <>
struct has_vector_path<uniform_kernel<float>> : std::true_type {};
template <>
struct has_vector_path<symmetric_uniform_kernel<float>> : std::true_type {};
template <>
struct has_vector_path<normal_kernel<float>> : std::true_type {};
template <>
struct has_vector_path<truncated_normal_kernel<float>> : std::true_type {};
template <>
struct has_vector_path<normal_kernel<double>> : std::true_type {};

// Whole groups of a kernel on a vector path (random/detail/lanes.hpp); false when
// the path or the compute type has none, and the caller takes the scalar walk.
template <class C, class Kernel>
bool vector_groups(instruction_set isa, const Kernel& k, const philox4x32_key& key,
                   std::uint32_t domain, std::uint64_t g0, std::uint64_t count, C* out) noexcept {
  if constexpr (std::is_same<C, float>::value && has_vector_path<Kernel>::value) {
    return groups_f32(isa, k, key, domain, g0, count, out);
  } else if constexpr (std::is_same<C, double>::value && has_vector_path<Kernel>::value) {
    return groups_f64(isa, k, key, domain, g0, count, out);
  } else {
    (void)isa, (void)k, (void)key, (void)domain, (void)g0, (void)count, (void)out;
    return false;
  }
}

// Whole groups g0 .. g0 + count - 1 of a float kernel written as elements to dst, moved
// inside [lo_min, hi_max] (the thresholds of fill's rounder), without a buffer; Out is
// float (float elements) or std::uint16_t (the bits of bfloat16 elements). False when
// the path has no such writer (nothing is written then).
template <class Kernel, class Out>
bool vector_elements(instruction_set isa, const Kernel& k, const stream& s, std::uint32_t domain,
                     std::uint64_t g0, std::uint64_t count, Out* dst, float hi_max,
                     float lo_min, bool streaming) noexcept {
  static_assert(std::is_same<Out, float>::value || std::is_same<Out, std::uint16_t>::value,
                "the direct writers store float or bfloat16 bits");
  if constexpr (!(has_vector_path<Kernel>::value && std::is_same<typename Kernel::compute_type, float>::value)) {
    (void)isa, (void)k, (void)s, (void)domain, (void)g0, (void)count, (void)dst, (void)hi_max,
        (void)lo_min, (void)streaming;
    return false;
  } else if constexpr (std::is_same<Out, float>::value) {
    return groups_f32_elements(isa, k, s.philox_key(), domain, g0, count, dst,
                               hi_max, lo_min, streaming);
  } else {
    return groups_bf16_elements(isa, k, s.philox_key(), domain, g0, count, dst,
                                hi_max, lo_min, streaming);
  }
}

// The element -> (block, slot) walk shared by every distribution, on instruction set
// `isa` (instruction_set_available(isa) must hold; every path gives the same bits). A
// run may start and end anywhere. The whole groups inside it go to the vector path of
// the kernel when there is one, written straight to out; every other group is computed
// into a local buffer laid out by r (r = 16 slot + lane), its 16 blocks' words by
// group_words and the kernel applied block by block, and the covered part copied out.
template <class C, class Kernel>
void generate_run_on(instruction_set isa, const Kernel& kernel, const stream& s,
                     std::uint32_t domain, std::uint64_t first, std::size_t n, C* out) noexcept {
  constexpr unsigned per_block = elements_per_block<C>;
  constexpr std::uint64_t per_group = elements_per_group<C>;
  const philox4x32_key key = s.philox_key();
  const std::uint64_t end = first + n;
  std::uint64_t i = first;
  while (i < end) {
    const std::uint64_t g = i / per_group;
    const std::uint64_t base = g * per_group;
    if (i == base && end - i >= per_group) {
      const std::uint64_t whole = (end - i) / per_group;
      if (vector_groups(isa, kernel, key, domain, g, whole, out + (i - first))) {
        i += whole * per_group;
        continue;
      }
    }
    const auto r0 = static_cast<unsigned>(i - base);
    const auto r1 = static_cast<unsigned>(std::min<std::uint64_t>(end - base, per_group));
    std::uint32_t words[64];
    group_words(isa, key, domain, g, words);
    C group[per_group];
    for (unsigned lane = 0; lane < 16; ++lane) {
      bool needed = false;
      for (unsigned slot = 0; slot < per_block; ++slot) {
        const unsigned r = 16 * slot + lane;
        needed = needed || (r >= r0 && r < r1);
      }
      if (!needed) continue;
      const philox4x32_counter block{words[lane], words[16 + lane], words[32 + lane],
                                     words[48 + lane]};
      C values[per_block];
      kernel(block, values);
      for (unsigned slot = 0; slot < per_block; ++slot) group[16 * slot + lane] = values[slot];
    }
    std::copy(group + r0, group + r1, out + (base + r0 - first));
    i = base + r1;
  }
}

// generate_run_on the widest instruction set of this CPU.
template <class C, class Kernel>
void generate_run(const Kernel& kernel, const stream& s, std::uint32_t domain, std::uint64_t first,
                  std::size_t n, C* out) noexcept {
  generate_run_on(best_instruction_set(), kernel, s, domain, first, n, out);
}

template <class C, class D>
void generate_checked(const D& d, const stream& s, std::uint32_t domain, std::uint64_t first,
                      std::size_t n, C* out) {
  static_assert(std::is_same<C, float>::value || std::is_same<C, double>::value,
                "generate writes the compute type: float or double");
  const auto kernel = prepare<C>(d);
  if (n > std::numeric_limits<std::uint64_t>::max() - first)
    reject_argument<std::length_error>("dist::generate", "n", std::to_string(n),
                                       "first + n at most 2^64 - 1 (first = " + std::to_string(first) + ")");
  if (n == 0) return;
  if (out == nullptr)
    reject_argument<std::invalid_argument>("dist::generate", "out", "nullptr",
                                           "storage for n = " + std::to_string(n) + " values");
  generate_run(kernel, s, domain, first, n, out);
}

// Every prepared kernel, as X(C, K) for K<C>: the closed set of transforms the compiled
// library (KINDLING_COMPILED, detail/compiled_mode.hpp) instantiates once.
#define KINDLING_FOR_EACH_KERNEL(X)                                                       \
  X(float, uniform_kernel) X(float, symmetric_uniform_kernel) X(float, normal_kernel)     \
  X(float, truncated_normal_kernel) X(double, uniform_kernel)                             \
  X(double, symmetric_uniform_kernel) X(double, normal_kernel) X(double, truncated_normal_kernel)

// The runs of a kernel, PREFIX = `extern template` (users' files in compiled mode) or
// `template` (the compiled library).
#define KINDLING_RUN_INSTANCE(PREFIX, C, K)                                                         \
  PREFIX void generate_run_on<C, K<C>>(instruction_set, const K<C>&, const stream&, std::uint32_t, \
                                        std::uint64_t, std::size_t, C*) noexcept;
#if defined(KINDLING_COMPILED)
#define KINDLING_EXTERN_RUN(C, K) KINDLING_RUN_INSTANCE(extern template, C, K)
KINDLING_FOR_EACH_KERNEL(KINDLING_EXTERN_RUN)
#undef KINDLING_EXTERN_RUN
#endif

}  // namespace detail

namespace dist {

/// Checks d; throws std::domain_error naming the field, its value and what was
/// expected. Parameters must be finite in float as well, because both compute types
/// draw from the same description.
inline void validate(const uniform& d) { (void)detail::prepare<double>(d); }
inline void validate(const symmetric_uniform& d) { (void)detail::prepare<double>(d); }
inline void validate(const normal& d) { (void)detail::prepare<double>(d); }
inline void validate(const truncated_normal& d) { (void)detail::prepare<double>(d); }

/// The interval the values lie in; element rounding keeps them there (element.hpp).
inline element_bounds bounds_of(const uniform& d) noexcept { return {d.lo, d.hi, false, true}; }
inline element_bounds bounds_of(const symmetric_uniform& d) noexcept {
  return {-d.bound, d.bound, true, true};
}
inline element_bounds bounds_of(const normal&) noexcept { return unbounded; }
inline element_bounds bounds_of(const truncated_normal& d) noexcept {
  return {std::fma(d.stddev, d.cut_lo, d.mean), std::fma(d.stddev, d.cut_hi, d.mean),
          std::isinf(d.cut_lo), std::isinf(d.cut_hi)};
}

/// The four distributions above (generate() takes exactly these).
template <class D>
struct is_distribution
    : std::integral_constant<bool, std::is_same<D, uniform>::value || std::is_same<D, symmetric_uniform>::value ||
                                       std::is_same<D, normal>::value || std::is_same<D, truncated_normal>::value> {};

/// out[k] = the value (compute type C = float or double) of global logical element
/// first + k, k < n, of distribution d in stream s, domain `domain`. Any split of a run
/// into sub-runs gives the same values. Validates d (and that first + n does not wrap
/// and out is not null when n > 0) before writing; n == 0 writes nothing.
template <class C, class D, std::enable_if_t<is_distribution<D>::value, int> = 0>
void generate(const D& d, const stream& s, std::uint32_t domain, std::uint64_t first, std::size_t n,
              C* out) {
  detail::generate_checked(d, s, domain, first, n, out);
}

}  // namespace dist

/// Standard deviation of a standard normal truncated to [cut_lo, cut_hi] (cuts as in
/// dist::truncated_normal): with Z = Phi(b) - Phi(a),
///   Var = 1 + (a phi(a) - b phi(b)) / Z - ((phi(a) - phi(b)) / Z)^2
/// (the standard formula, e.g. Johnson, Kotz & Balakrishnan, Continuous Univariate
/// Distributions vol. 1, 2nd ed., sec. 10.1), a phi(a) taken as 0 at an infinite cut.
/// Uses kindling's own Phi and pdf, so it is the same on every build. Relative accuracy
/// about 1e-15 for cuts near the centre; far in one tail the formula cancels (about
/// 1e-12 for [8, 9]).  (In the compiled library in that mode, detail/compiled_mode.hpp.)
KINDLING_COMPILED_INLINE double truncated_normal_stddev(double cut_lo, double cut_hi);
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE double truncated_normal_stddev(double cut_lo, double cut_hi) {
  const detail::cut_probabilities c = detail::validated_cuts("truncated_normal", cut_lo, cut_hi);
  const double pdf_lo = detail::normal_pdf(cut_lo), pdf_hi = detail::normal_pdf(cut_hi);
  const double hi_term = std::isinf(cut_hi) ? 0.0 : cut_hi * pdf_hi;
  const double moment = std::isinf(cut_lo) ? -hi_term : std::fma(cut_lo, pdf_lo, -hi_term);
  const double mean = (pdf_lo - pdf_hi) / c.mass;
  const double var = std::fma(-mean, mean, 1.0 + moment / c.mass);
  return std::sqrt(std::max(var, 0.0));
}
#endif

}  // namespace kindling

#endif  // KINDLING_RANDOM_SAMPLE_HPP
