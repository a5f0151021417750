// Element types a parameter can be stored in, and the last step of a value's path:
// compute type -> element type, rounded to nearest-even and kept inside the bounds of
// the distribution it was drawn from.
//
//   element    compute type   words per element (DEVELOPERS.md "Element index and words")
//   float      float          1
//   double     double         2
//   float16    float          1     IEEE 754-2008 binary16, rounded from float
//   bfloat16   float          1     8-bit exponent, 7-bit fraction, rounded from float
//
// float16 and bfloat16 are storage types (their bit pattern); the Eigen adapter bit-casts
// Eigen::half and Eigen::bfloat16 to them.
#ifndef KINDLING_ELEMENT_HPP
#define KINDLING_ELEMENT_HPP

#include <cstdint>
#include <cstring>
#include <limits>
#include <type_traits>
#include <utility>

#include "kindling/detail/dmath.hpp"

namespace kindling {

template <class E>
struct element_traits;

struct float16 {
  std::uint16_t bits;
};
struct bfloat16 {
  std::uint16_t bits;
};

// The interval a distribution's values lie in; lo = -inf / hi = +inf when unbounded.
struct element_bounds {
  double lo;
  double hi;
  bool lo_open;
  bool hi_open;
};

inline constexpr element_bounds unbounded{-std::numeric_limits<double>::infinity(),
                                          std::numeric_limits<double>::infinity(), true, true};

// ---- float <-> float16 / bfloat16 ---------------------------------------------------

// binary16 from binary32, round to nearest, ties to even; overflow gives infinity, NaN
// stays NaN (quiet, sign and top payload bits kept).
inline float16 round_to_float16(float x) noexcept {
  const std::uint32_t b = detail::bits_of(x);
  const auto sign = static_cast<std::uint16_t>((b >> 16) & 0x8000u);
  const std::uint32_t a = b & 0x7fffffffu;
  if (a >= 0x7f800000u) {  // inf or NaN
    const std::uint32_t nan = a > 0x7f800000u ? (0x0200u | ((a >> 13) & 0x03ffu)) : 0u;
    return {static_cast<std::uint16_t>(sign | 0x7c00u | nan)};
  }
  if (a >= 0x47800000u) return {static_cast<std::uint16_t>(sign | 0x7c00u)};  // >= 2^16
  std::uint32_t h;
  if (a >= 0x38800000u) {  // >= 2^-14: normal in binary16; rebias the exponent
    h = (a >> 13) - (112u << 10);
    const std::uint32_t rest = a & 0x1fffu;
    // A carry out of the fraction correctly bumps the exponent (up to infinity).
    if (rest > 0x1000u || (rest == 0x1000u && (h & 1u))) ++h;
  } else {  // binary16 subnormal (units of 2^-24) or zero
    const std::uint32_t e = a >> 23;
    const std::uint32_t shift = 126u - e;  // value = m * 2^(e - 150) = (m >> shift) * 2^-24
    if (e == 0 || shift > 24u) {
      h = 0;  // below 2^-25: rounds to zero
    } else {
      const std::uint32_t m = (a & 0x7fffffu) | 0x800000u;
      h = m >> shift;
      const std::uint32_t rest = m & ((1u << shift) - 1u);
      const std::uint32_t half = 1u << (shift - 1u);
      if (rest > half || (rest == half && (h & 1u))) ++h;
    }
  }
  return {static_cast<std::uint16_t>(sign | h)};
}

// binary16 -> binary32 is exact.
inline float to_float(float16 x) noexcept {
  const std::uint32_t sign = static_cast<std::uint32_t>(x.bits & 0x8000u) << 16;
  const std::uint32_t e = (x.bits >> 10) & 0x1fu;
  const std::uint32_t m = x.bits & 0x03ffu;
  if (e == 0) {  // zero or subnormal: m * 2^-24, exact in float
    const float v = static_cast<float>(m) * 0x1p-24f;
    return sign ? -v : v;
  }
  if (e == 31) return detail::float_from_bits(sign | 0x7f800000u | (m << 13));
  return detail::float_from_bits(sign | ((e + 112u) << 23) | (m << 13));
}

// bfloat16 from binary32, round to nearest, ties to even (on the dropped 16 bits).
inline bfloat16 round_to_bfloat16(float x) noexcept {
  const std::uint32_t b = detail::bits_of(x);
  if ((b & 0x7fffffffu) > 0x7f800000u) return {static_cast<std::uint16_t>((b >> 16) | 0x0040u)};
  const std::uint32_t rounded = b + 0x7fffu + ((b >> 16) & 1u);
  return {static_cast<std::uint16_t>(rounded >> 16)};
}

namespace detail {
// A bfloat16 is the upper half of a binary32: its bits, shifted up, are the float
// exactly. The one place that says so; the audits' loops over stored halves call it.
inline float float_of_bfloat16_bits(std::uint16_t bits) noexcept {
  return float_from_bits(static_cast<std::uint32_t>(bits) << 16);
}
// The bfloat16 stored at bytes + 2 j, as a float (memcpy: any alignment).
inline float float_of_bfloat16_at(const void* bytes, std::uint64_t j) noexcept {
  std::uint16_t bits;
  std::memcpy(&bits, static_cast<const unsigned char*>(bytes) + 2 * j, sizeof bits);
  return float_of_bfloat16_bits(bits);
}
}  // namespace detail

inline float to_float(bfloat16 x) noexcept { return detail::float_of_bfloat16_bits(x.bits); }

namespace detail {

// One representable step up / down for a sign-magnitude bit pattern (IEEE layout) of
// width U with sign bit `sign`: the neighbours in the order of the real line.
template <class U>
constexpr U step_up_bits(U b, U sign) noexcept {
  if (b == sign) return U{1};  // -0 -> smallest positive
  return (b & sign) ? static_cast<U>(b - 1u) : static_cast<U>(b + 1u);
}
template <class U>
constexpr U step_down_bits(U b, U sign) noexcept {
  if (b == 0) return static_cast<U>(sign | 1u);  // +0 -> smallest negative
  return (b & sign) ? static_cast<U>(b + 1u) : static_cast<U>(b - 1u);
}

// 1: above the bounds (or on an open upper bound), -1: below, 0: inside (or NaN).
inline int side_of(double v, const element_bounds& bd) noexcept {
  if (v > bd.hi || (bd.hi_open && v == bd.hi)) return 1;
  if (v < bd.lo || (bd.lo_open && v == bd.lo)) return -1;
  return 0;
}

// How each element type is stored: its bit pattern, the rounding from the compute
// type, and the exact value of a pattern.
template <class E>
struct element_codec;

// float and double: computed in themselves, stored as their own IEEE pattern.
template <class T, class U>
struct native_codec {
  using bits = U;
  static constexpr bits sign = static_cast<bits>(bits{1} << (8 * sizeof(bits) - 1));
  static bits round(T v) noexcept { return bits_of(v); }
  static T make(bits b) noexcept {
    if constexpr (sizeof(T) == 4) return float_from_bits(b);
    else return double_from_bits(b);
  }
  static double value(bits b) noexcept { return static_cast<double>(make(b)); }
};
template <>
struct element_codec<float> : native_codec<float, std::uint32_t> {};
template <>
struct element_codec<double> : native_codec<double, std::uint64_t> {};
// The 16-bit types: computed in float, rounded by their own rule.
template <class H, H (*round_from_float)(float) noexcept>
struct half_codec {
  using bits = std::uint16_t;
  static constexpr bits sign = 0x8000u;
  static bits round(float v) noexcept { return round_from_float(v).bits; }
  static H make(bits b) noexcept { return {b}; }
  static double value(bits b) noexcept { return static_cast<double>(to_float(H{b})); }
};
template <>
struct element_codec<float16> : half_codec<float16, round_to_float16> {};
template <>
struct element_codec<bfloat16> : half_codec<bfloat16, round_to_bfloat16> {};

// The one rounding from the compute type C to the element type E under a
// distribution's bounds: round to nearest even, then a value outside the bounds (or on
// an open bound) moves one representable step toward the inside. It is outside only
// by rounding, so one step suffices whenever the interval holds a value of E; NaN
// passes through. element_traits<E>::from_compute is this rounder; fill keeps one per
// call, and the vector writers (random/detail/lanes_body.hpp) apply its thresholds.
//
// The thresholds: "above the bounds (or on an open upper bound)" holds for an
// upward-closed set of values, so for the exact value t (in C) of the rounded element
// it is t > hi_max, hi_max the largest C not above; the same below with lo_min. Bounds
// that give no such thresholds (never those of a valid distribution) are compared as
// doubles instead, with the same result.
template <class E, class = void>
struct element_rounder {
  // An element type without a codec (an adapter's own type, forwarding its traits to
  // one of ours) rounds through its traits.
  using compute = typename element_traits<E>::compute_type;
  element_bounds bounds;
  compute hi_max{}, lo_min{};
  bool thresholds = false;
  explicit element_rounder(const element_bounds& b) noexcept : bounds(b) {}
  E operator()(compute v) const noexcept { return element_traits<E>::from_compute(v, bounds); }
};

template <class E>
struct element_rounder<E, std::void_t<decltype(element_codec<E>::sign)>> {
  using codec = element_codec<E>;
  using compute = std::conditional_t<std::is_same<E, double>::value, double, float>;
  element_bounds bounds;
  compute hi_max, lo_min;
  bool thresholds;

  explicit element_rounder(const element_bounds& b) noexcept
      : bounds(b), hi_max(limit(b, true)), lo_min(limit(b, false)) {
    thresholds = hi_max == hi_max && lo_min == lo_min && lo_min <= hi_max;
  }

  E operator()(compute v) const noexcept {
    typename codec::bits x = codec::round(v);
    int side;
    if (thresholds) {
      const auto t = static_cast<compute>(codec::value(x));  // exact: E's values are C's
      side = t > hi_max ? 1 : t < lo_min ? -1 : 0;
    } else {
      side = side_of(codec::value(x), bounds);
    }
    if (side > 0) x = step_down_bits(x, codec::sign);
    if (side < 0) x = step_up_bits(x, codec::sign);
    return codec::make(x);
  }

 private:
  // The largest (upper) / smallest (lower) value of C that is not outside on that side.
  static compute limit(const element_bounds& b, bool upper) noexcept {
    using cbits = typename element_codec<compute>::bits;
    constexpr cbits sign = element_codec<compute>::sign;
    const auto outside = [&](compute t) {
      const int side = side_of(static_cast<double>(t), b);
      return upper ? side > 0 : side < 0;
    };
    const auto inward = [&](compute t) {
      const cbits x = bits_of(t);
      return element_codec<compute>::make(upper ? step_down_bits(x, sign) : step_up_bits(x, sign));
    };
    const auto outward = [&](compute t) {
      const cbits x = bits_of(t);
      return element_codec<compute>::make(upper ? step_up_bits(x, sign) : step_down_bits(x, sign));
    };
    const compute inf = std::numeric_limits<compute>::infinity();
    compute t = static_cast<compute>(upper ? b.hi : b.lo);
    for (int k = 0; k < 4 && t == t && outside(t); ++k) t = inward(t);
    if (t != t || outside(t)) return std::numeric_limits<compute>::quiet_NaN();
    for (int k = 0; k < 4 && t != (upper ? inf : -inf); ++k) {
      const compute next = outward(t);
      if (next != next || outside(next)) return t;
      t = next;
    }
    return t == (upper ? inf : -inf) ? t : std::numeric_limits<compute>::quiet_NaN();
  }
};

// The members every element_traits shares; from_compute is element_rounder above.
template <class E, class Compute, unsigned Words>
struct element_traits_base {
  using compute_type = Compute;
  static constexpr unsigned words = Words;
  static E from_compute(Compute v, const element_bounds& b) noexcept {
    return element_rounder<E>(b)(v);
  }
};

}  // namespace detail

// ---- element traits -----------------------------------------------------------------
// compute_type: the type values are computed in; name: the element type's short name;
// words: 32-bit counter words per element (DEVELOPERS.md "Element index and words");
// from_compute(v, bounds): the element for v; to_double(e): its exact value.

template <class E>
struct element_traits;

template <>
struct element_traits<float> : detail::element_traits_base<float, float, 1> {
  static constexpr const char* name = "f32";
  static double to_double(float v) noexcept { return static_cast<double>(v); }
};

template <>
struct element_traits<double> : detail::element_traits_base<double, double, 2> {
  static constexpr const char* name = "f64";
  static double to_double(double v) noexcept { return v; }
};

template <>
struct element_traits<float16> : detail::element_traits_base<float16, float, 1> {
  static constexpr const char* name = "f16";
  static double to_double(float16 v) noexcept { return static_cast<double>(to_float(v)); }
};

template <>
struct element_traits<bfloat16> : detail::element_traits_base<bfloat16, float, 1> {
  static constexpr const char* name = "bf16";
  static double to_double(bfloat16 v) noexcept { return static_cast<double>(to_float(v)); }
};

template <class E>
using compute_type_t = typename element_traits<E>::compute_type;

// ---- element kinds ------------------------------------------------------------------
// An element type as a run-time value: what a file or a model plan says a tensor holds.
// The .npy and safetensors readers and writers and the model plan all use this one.

enum class element_kind { f16, bf16, f32, f64 };

/// "f16", "bf16", "f32" or "f64" (the tool's --dtype spellings).
inline const char* element_kind_name(element_kind k) noexcept {
  switch (k) {
    case element_kind::f16: return "f16";
    case element_kind::bf16: return "bf16";
    case element_kind::f32: return "f32";
    case element_kind::f64: return "f64";
  }
  return "unknown";
}

/// Bytes per element.
inline std::uint64_t element_kind_bytes(element_kind k) noexcept {
  return k == element_kind::f64 ? 8 : k == element_kind::f32 ? 4 : 2;
}

/// The kind of element type E (float, double, float16, bfloat16).
template <class E>
struct element_kind_of;
template <>
struct element_kind_of<float> : std::integral_constant<element_kind, element_kind::f32> {};
template <>
struct element_kind_of<double> : std::integral_constant<element_kind, element_kind::f64> {};
template <>
struct element_kind_of<float16> : std::integral_constant<element_kind, element_kind::f16> {};
template <>
struct element_kind_of<bfloat16> : std::integral_constant<element_kind, element_kind::bf16> {};

/// Turns `count` elements of `item` bytes each, in the host's byte order, into their
/// little-endian bytes in place (files are little-endian on every host; nothing to do on
/// a little-endian one). Tested on big-endian s390x by tests/digest/tool_files.sh.
inline void to_little_endian(unsigned char* bytes, std::uint64_t count, std::uint64_t item) noexcept {
  const std::uint16_t one = 1;
  unsigned char first = 0;
  std::memcpy(&first, &one, 1);
  if (first == 1 || item < 2) return;
  for (std::uint64_t i = 0; i < count; ++i, bytes += item) {
    for (std::uint64_t a = 0, b = item - 1; a < b; ++a, --b) std::swap(bytes[a], bytes[b]);
  }
}

}  // namespace kindling

#endif  // KINDLING_ELEMENT_HPP
