// The group functions of one instruction set, written once against its lane
// primitives. Each function transcribes its scalar counterpart (named beside it)
// operation for operation; see lanes.hpp for why the bits agree.
//
// An instruction-set header (random/detail/avx512.hpp, avx2.hpp) includes this file
// inside its target region, after defining KINDLING_LANES_WIDTH (16 or 8) and, in
// namespace kindling::detail::lanes_avx512 (16) or lanes_avx2 (8), the primitives it
// uses, and nothing else of the includer:
//   lanes                          lanes a vector
//   vu, vf, vm                     vectors of uint32, float, and a lane mask
//   u_set1 u_iota u_add u_sub u_xor u_and u_or u_srl<n> u_sll<n> u_eq u_ge u_select
//   u_mulhilo u_bits u_trunc_f u_load u_store u_store_elements u16_store_elements
//   f_set1 f_add f_sub f_mul f_div f_sqrt f_fma f_fnma f_fms f_floor f_neg f_abs
//   f_flip_sign f_from_small_u f_from_i f_exponent f_from_bits f_lt f_le f_ge f_eq
//   f_select f_store
//   m_and m_none_of
// The body is emitted once per instruction set: the guard below is keyed by the width.
#ifndef KINDLING_LANES_WIDTH
#error "lanes_body.hpp is included by random/detail/avx512.hpp or avx2.hpp, which define KINDLING_LANES_WIDTH"
#endif

#include <cstddef>
#include <cstdint>
#include <limits>
#include <type_traits>

#include "kindling/detail/dmath.hpp"
#include "kindling/random/philox.hpp"

namespace kindling::detail {
// The prepared transforms of random/sample.hpp, which the vector paths take as they are
// (one description of each distribution for the scalar and the vector code).
template <class C>
struct uniform_kernel;
template <class C>
struct symmetric_uniform_kernel;
template <class C>
struct normal_kernel;
template <class C>
struct truncated_normal_kernel;
}  // namespace kindling::detail

#if KINDLING_LANES_WIDTH == 16
#ifndef KINDLING_RANDOM_DETAIL_LANES_BODY_16
#define KINDLING_RANDOM_DETAIL_LANES_BODY_16
#define KINDLING_LANES_BODY_EMIT
#define KINDLING_LANES_NAMESPACE lanes_avx512
#endif
#elif KINDLING_LANES_WIDTH == 8
#ifndef KINDLING_RANDOM_DETAIL_LANES_BODY_8
#define KINDLING_RANDOM_DETAIL_LANES_BODY_8
#define KINDLING_LANES_BODY_EMIT
#define KINDLING_LANES_NAMESPACE lanes_avx2
#endif
#else
#error "KINDLING_LANES_WIDTH is 16 (AVX-512) or 8 (AVX2)"
#endif

#ifdef KINDLING_LANES_BODY_EMIT
namespace kindling::detail::KINDLING_LANES_NAMESPACE {

static_assert(lanes == KINDLING_LANES_WIDTH, "the includer's primitives are KINDLING_LANES_WIDTH wide");

// Philox4x32-10 (philox.hpp, philox_rounds) of N units of `lanes` consecutive blocks,
// unit k starting at block b0 + k lanes, counters from counter_of (philox.hpp). A unit
// starts at a multiple of `lanes`, which divides 2^32, so within a unit the low word is
// that of its first block plus the lane and the other words are constant. The N units
// are independent chains, interleaved so that the multiplier latency overlaps.
template <unsigned N>
inline void philox_units(const philox4x32_key& key, std::uint32_t domain, std::uint64_t b0,
                         vu (&x)[N][4]) noexcept {
  for (unsigned k = 0; k < N; ++k) {
    const philox4x32_counter c = counter_of(domain, b0 + std::uint64_t{k} * lanes);
    x[k][0] = u_add(u_set1(c[0]), u_iota());
    for (unsigned j = 1; j < 4; ++j) x[k][j] = u_set1(c[j]);
  }
  std::uint32_t k0 = key[0], k1 = key[1];
  for (unsigned round = 0; round < philox_rounds_count; ++round) {
    if (round != 0) {
      k0 += philox4x32_key_increments[0];
      k1 += philox4x32_key_increments[1];
    }
    const vu kv0 = u_set1(k0), kv1 = u_set1(k1);
    for (unsigned k = 0; k < N; ++k) {
      vu hi0, lo0, hi1, lo1;
      u_mulhilo(x[k][2], philox4x32_multipliers[0], hi0, lo0);
      u_mulhilo(x[k][0], philox4x32_multipliers[1], hi1, lo1);
      x[k][0] = u_xor(u_xor(hi0, x[k][1]), kv0);
      x[k][1] = lo0;
      x[k][2] = u_xor(u_xor(hi1, x[k][3]), kv1);
      x[k][3] = lo1;
    }
  }
}

// Runs a transform t over `count` whole groups from g0: t(w, v) turns the four word
// vectors of one unit into its four value vectors (v[j] for slot j), and
// sink(unit, v) stores them; unit k covers blocks 16 g0 + k lanes .. + lanes - 1.
template <class T, class Sink>
inline void drive_units(const T& t, const philox4x32_key& key, std::uint32_t domain,
                        std::uint64_t g0, std::uint64_t count, Sink& sink) noexcept {
  constexpr unsigned batch = 4;
  const std::uint64_t units = count * (16 / lanes);
  const std::uint64_t b0 = 16 * g0;
  std::uint64_t u = 0;
  for (; u + batch <= units; u += batch) {
    vu x[batch][4];
    philox_units<batch>(key, domain, b0 + u * lanes, x);
    for (unsigned k = 0; k < batch; ++k) {
      vf v[4];
      t(x[k], v);
      sink(u + k, v);
    }
  }
  for (; u < units; ++u) {
    vu x[1][4];
    philox_units<1>(key, domain, b0 + u * lanes, x);
    vf v[4];
    t(x[0], v);
    sink(u, v);
  }
}

// drive_units with the values stored at out[64 k + r] for group g0 + k (r = 16 slot + lane).
template <class T>
inline void drive_groups(const T& t, const philox4x32_key& key, std::uint32_t domain,
                         std::uint64_t g0, std::uint64_t count, float* out) noexcept {
  auto sink = [out](std::uint64_t unit, const vf (&v)[4]) {
    const std::uint64_t first_lane = unit * lanes;  // block offset from 16 g0
    float* const at = out + (first_lane / 16) * 64 + first_lane % 16;
    for (unsigned j = 0; j < 4; ++j) f_store(at + 16 * j, v[j]);
  };
  drive_units(t, key, domain, g0, count, sink);
}

// group_words_scalar.
inline void group_words(const philox4x32_key& key, std::uint32_t domain, std::uint64_t g,
                        std::uint32_t* w) noexcept {
  for (unsigned h = 0; h < 16; h += lanes) {
    vu x[1][4];
    philox_units<1>(key, domain, 16 * g + h, x);
    for (unsigned j = 0; j < 4; ++j) u_store(w + 16 * j + h, x[0][j]);
  }
}

// unit_uniform<float>: (w >> 8) 2^-24; unit_uniform_open<float>: ((w >> 8) | 1) 2^-24.
inline vf unit_lanes(vu w) noexcept { return f_mul(f_from_small_u(u_srl<8>(w)), f_set1(0x1p-24f)); }
inline vf unit_open_lanes(vu w) noexcept {
  return f_mul(f_from_small_u(u_or(u_srl<8>(w), u_set1(1u))), f_set1(0x1p-24f));
}

template <std::size_t N>
inline vf horner_lanes(vf x, const float (&c)[N]) noexcept {
  vf p = f_set1(c[N - 1]);
  for (std::size_t i = N - 1; i-- > 0;) p = f_fma(p, x, f_set1(c[i]));
  return p;
}

// dmath.hpp log<float>, for finite x > 0 (subnormals included unless `normal_only`,
// which leaves their dead branch out for callers whose x >= 2^-126).
//
// The split x = 2^k m is done in one integer add: adding 0x3f800000 - 0x3f3504f3 to the
// bits carries into the exponent exactly when the fraction is >= sqrt2_fraction
// (0x3504f3), the case where dmath.hpp takes m in [sqrt(2)/2, 1) and k + 1; adding
// 0x3f3504f3 back to the low 23 bits then gives m's bits with exponent 126 or 127 as
// there. Same k and m, so the same bits.
template <bool normal_only = false>
inline vf log_lanes(vf x) noexcept {
  using K = kernel_constants<float>;
  static_assert(K::sqrt2_fraction == 0x3504f3u, "the split below assumes this threshold");
  vu b = u_bits(x);
  vu k = u_set1(0u);  // the subnormal offset of k
  if constexpr (!normal_only) {
    const vm subnormal = u_eq(u_srl<23>(b), u_set1(0u));
    b = u_select(subnormal, u_bits(f_mul(x, f_set1(static_cast<float>(1u << 25)))), b);
    k = u_select(subnormal, u_set1(static_cast<std::uint32_t>(-25)), k);
  }
  const vu shifted = u_add(b, u_set1(0x3f800000u - 0x3f3504f3u));
  const vf m = f_from_bits(u_add(u_and(shifted, u_set1(0x7fffffu)), u_set1(0x3f3504f3u)));
  const vf f = f_sub(m, f_set1(1.0f));
  const vf s = f_div(f, f_add(f_set1(2.0f), f));
  const vf z = f_mul(s, s);
  const vf f_minus_r = f_fnma(z, horner_lanes(z, K::log_r), f);  // fma(-z, R, f)
  const vf log1pf = f_fnma(s, f_minus_r, f);                       // fma(-s, f - R, f)
  // k = (exponent field of shifted) - 127 (+ the subnormal offset), as a float: shifted
  // is the bits of a positive normal float, whose exponent f_exponent gives exactly.
  vf kt = f_exponent(f_from_bits(shifted));
  if constexpr (!normal_only) kt = f_add(kt, f_from_i(k));  // small integers: exact
  return f_fma(kt, f_set1(K::ln2_hi), f_fma(kt, f_set1(K::ln2_lo), log1pf));
}

// dmath.hpp sincos_2pi<float> of u = k 2^-24 (k < 2^24 the integer of unit_uniform,
// given as the float kf): 4 u = kf 2^-22 exactly, so fma(kf, 2^-22, c) is fma(4, u, c).
// The quadrant q mod 4 swaps for odd q and negates by flipping sign bits: sin for
// q mod 4 in {2, 3} (bit 1 of q), cos for {1, 2} (bit 1 of q + 1).
inline void sincos_2pi_units(vf kf, vf& sin_out, vf& cos_out) noexcept {
  using K = kernel_constants<float>;
  const vf q = f_floor(f_fma(kf, f_set1(0x1p-22f), f_set1(0.5f)));
  const vf t = f_fms(kf, f_set1(0x1p-22f), q);  // fma(4, u, -q)
  const vf t2 = f_mul(t, t);
  const vf s = f_mul(t, horner_lanes(t2, K::sin_c));
  const vf c = horner_lanes(t2, K::cos_c);
  const vu qi = u_trunc_f(q);
  // 0: (s, c), 1: (c, -s), 2: (-s, -c), 3: (-c, s)
  const vm odd = u_eq(u_and(qi, u_set1(1u)), u_set1(1u));
  sin_out = f_flip_sign(f_select(odd, c, s), u_sll<30>(qi));
  cos_out = f_flip_sign(f_select(odd, s, c), u_sll<30>(u_add(qi, u_set1(1u))));
}

// dmath.hpp normal_quantile<float> (AS 241 PPND7), every p.
inline vf quantile_lanes(vf p) noexcept {
  using K = kernel_constants<float>;
  const vf q = f_sub(p, f_set1(0.5f));
  const vm central = f_le(f_abs(q), f_set1(0.425f));
  const vf rc = f_fma(f_neg(q), q, f_set1(0.180625f));
  const vf zc = f_div(f_mul(q, horner_lanes(rc, K::ppnd_a)), horner_lanes(rc, K::ppnd_b));
  const vm negative = f_lt(q, f_set1(0.0f));
  const vf tail_p = f_select(negative, p, f_sub(f_set1(1.0f), p));
  // log is defined for x > 0; lanes that are central or outside (0, 1) are replaced below.
  const vf safe = f_select(f_lt(f_set1(0.0f), tail_p), tail_p, f_set1(0.5f));
  const vf r = f_sqrt(f_neg(log_lanes(safe)));
  const vm near = f_le(r, f_set1(5.0f));
  const vf rn = f_sub(r, f_set1(1.6f)), rf = f_sub(r, f_set1(5.0f));
  const vf zn = f_div(horner_lanes(rn, K::ppnd_c), horner_lanes(rn, K::ppnd_d));
  const vf zf = f_div(horner_lanes(rf, K::ppnd_e), horner_lanes(rf, K::ppnd_f));
  const vf zt = f_select(near, zn, zf);
  vf z = f_select(central, zc, f_select(negative, f_neg(zt), zt));
  // Outside (0, 1): p == 0 -> -inf, p == 1 -> +inf, otherwise NaN.
  const vm inside = m_and(f_lt(f_set1(0.0f), p), f_lt(p, f_set1(1.0f)));
  const float inf = std::numeric_limits<float>::infinity();
  const vf outside = f_select(f_eq(p, f_set1(0.0f)), f_set1(-inf),
                              f_select(f_eq(p, f_set1(1.0f)), f_set1(inf),
                                       f_set1(std::numeric_limits<float>::quiet_NaN())));
  z = f_select(inside, z, outside);
  return z;
}

// sample.hpp uniform_kernel<float>: x = fma(width, u, lo); x >= hi -> largest below hi.
struct uniform_unit {
  vf width, lo, hi, below;
  void operator()(const vu (&w)[4], vf (&v)[4]) const noexcept {
    for (unsigned j = 0; j < 4; ++j) {
      const vf x = f_fma(width, unit_lanes(w[j]), lo);
      v[j] = f_select(f_ge(x, hi), below, x);
    }
  }
};

// sample.hpp symmetric_uniform_kernel<float>: bound (fma(2, u, -1) + 2^-24), with
// u = k 2^-24 for the integer k, so 2 u = k 2^-23 exactly and fma(k, 2^-23, -1) is the
// same fma.
struct symmetric_unit {
  vf bound;
  void operator()(const vu (&w)[4], vf (&v)[4]) const noexcept {
    for (unsigned j = 0; j < 4; ++j) {
      const vf k = f_from_small_u(u_srl<8>(w[j]));
      const vf centred = f_add(f_fma(k, f_set1(0x1p-23f), f_set1(-1.0f)), f_set1(0x1p-24f));
      v[j] = f_mul(bound, centred);
    }
  }
};

// sample.hpp normal_kernel<float>: Box-Muller on slots (0, 1) and (2, 3) of each block.
struct normal_unit {
  vf mean, stddev;
  void operator()(const vu (&w)[4], vf (&v)[4]) const noexcept {
    for (unsigned j = 0; j < 4; j += 2) {
      // 1 - u1 = 1 - k 2^-24, exact either way (k the integer of u1).
      const vf one_minus_u1 = f_fnma(f_from_small_u(u_srl<8>(w[j])), f_set1(0x1p-24f), f_set1(1.0f));
      const vf r = f_sqrt(f_mul(f_set1(-2.0f), log_lanes<true>(one_minus_u1)));
      vf sin_v, cos_v;
      sincos_2pi_units(f_from_small_u(u_srl<8>(w[j + 1])), sin_v, cos_v);
      v[j] = f_fma(stddev, f_mul(r, cos_v), mean);
      v[j + 1] = f_fma(stddev, f_mul(r, sin_v), mean);
    }
  }
};

// sample.hpp truncated_normal_kernel<float>: inversion from the nearer tail.
struct truncated_unit {
  vf mass, lower, upper, cut_lo, cut_hi, mean, stddev;
  void operator()(const vu (&w)[4], vf (&v)[4]) const noexcept {
    for (unsigned j = 0; j < 4; ++j) {
      const vf uo = unit_open_lanes(w[j]);
      const vf pl = f_fma(uo, mass, lower);
      const vm from_lower = f_le(pl, f_set1(0.5f));
      const vf pu = f_fma(f_sub(f_set1(1.0f), uo), mass, upper);
      // One quantile per lane, on the probability of its branch.
      const vf qz = quantile_lanes(f_select(from_lower, pl, pu));
      vf z = f_select(from_lower, qz, f_neg(qz));
      z = f_select(f_lt(z, cut_lo), cut_lo, z);  // std::max(z, cut_lo)
      z = f_select(f_lt(cut_hi, z), cut_hi, z);  // std::min(.., cut_hi)
      v[j] = f_fma(stddev, z, mean);
    }
  }
};

// The vector transform of a prepared float kernel (random/sample.hpp): its parameters
// broadcast to every lane. Templates so that the kernels, declared in lanes.hpp and
// defined in sample.hpp, are complete where these are used.
template <class C>
inline uniform_unit make_unit(const uniform_kernel<C>& k) noexcept {
  static_assert(std::is_same<C, float>::value, "the vector transforms are float");
  return {f_set1(k.width), f_set1(k.lo), f_set1(k.hi), f_set1(k.below_hi)};
}
template <class C>
inline symmetric_unit make_unit(const symmetric_uniform_kernel<C>& k) noexcept {
  static_assert(std::is_same<C, float>::value, "the vector transforms are float");
  return {f_set1(k.bound)};
}
template <class C>
inline normal_unit make_unit(const normal_kernel<C>& k) noexcept {
  static_assert(std::is_same<C, float>::value, "the vector transforms are float");
  return {f_set1(k.mean), f_set1(k.stddev)};
}
template <class C>
inline truncated_unit make_unit(const truncated_normal_kernel<C>& k) noexcept {
  static_assert(std::is_same<C, float>::value, "the vector transforms are float");
  return {f_set1(k.mass),   f_set1(k.lower), f_set1(k.upper), f_set1(k.cut_lo),
          f_set1(k.cut_hi), f_set1(k.mean),  f_set1(k.stddev)};
}

// Whole groups of a prepared float kernel, out[64 k + r] for group g0 + k.
template <class Kernel>
inline void groups(const Kernel& p, const philox4x32_key& key, std::uint32_t domain,
                   std::uint64_t g0, std::uint64_t count, float* out) noexcept {
  drive_groups(make_unit(p), key, domain, g0, count, out);
}

// element.hpp step_down_bits / step_up_bits on each lane, `sign` the sign bit.
inline vu step_down_lanes(vu x, vu sign) noexcept {
  const vm negative = u_eq(u_and(x, sign), sign);
  const vu stepped = u_select(negative, u_add(x, u_set1(1u)), u_sub(x, u_set1(1u)));
  return u_select(u_eq(x, u_set1(0u)), u_or(sign, u_set1(1u)), stepped);
}
inline vu step_up_lanes(vu x, vu sign) noexcept {
  const vm negative = u_eq(u_and(x, sign), sign);
  const vu stepped = u_select(negative, u_sub(x, u_set1(1u)), u_add(x, u_set1(1u)));
  return u_select(u_eq(x, sign), u_set1(1u), stepped);
}

// The threshold step of round_store_f32 on one vector of float elements x (bits): a
// lane above hm (below lm) moves one step down (up). Almost every vector has no such
// lane, so it is tested first.
inline vu inside_f32(vu x, vf hm, vf lm) noexcept {
  const vf t = f_from_bits(x);
  const vm above = f_lt(hm, t), below = f_lt(t, lm);
  if (m_none_of(above, below)) return x;
  const vu sign = u_set1(0x80000000u);
  return u_select(above, step_down_lanes(x, sign), u_select(below, step_up_lanes(x, sign), x));
}

// element.hpp round_to_bfloat16 of the float bits b on each lane (the bfloat16 bits in
// the low 16 bits of the lane), then the threshold step of inside_f32 on the result.
inline vu inside_bf16(vu b, vf hm, vf lm) noexcept {
  const vm nan = u_ge(u_and(b, u_set1(0x7fffffffu)), u_set1(0x7f800001u));
  const vu rounded = u_srl<16>(u_add(u_add(b, u_set1(0x7fffu)), u_and(u_srl<16>(b), u_set1(1u))));
  const vu x = u_select(nan, u_or(u_srl<16>(b), u_set1(0x0040u)), rounded);
  const vf t = f_from_bits(u_sll<16>(x));
  const vm above = f_lt(hm, t), below = f_lt(t, lm);
  if (m_none_of(above, below)) return x;
  const vu sign = u_set1(0x8000u);
  return u_select(above, step_down_lanes(x, sign), u_select(below, step_up_lanes(x, sign), x));
}

// One value vector stored as float elements, or as the bits of bfloat16 elements, each
// moved inside [lo_min, hi_max] as element.hpp's element_rounder does.
inline void store_element_vector(float* at, vf v, vf hm, vf lm, bool nt) noexcept {
  u_store_elements(at, inside_f32(u_bits(v), hm, lm), nt);
}
inline void store_element_vector(std::uint16_t* at, vf v, vf hm, vf lm, bool nt) noexcept {
  u16_store_elements(at, inside_bf16(u_bits(v), hm, lm), nt);
}

// lanes.hpp round_store_f32 / round_store_bf16: computed float values from src, rounded
// to the element type and moved a step inside; Out is float or std::uint16_t.
template <class Out>
inline std::size_t round_store(const float* src, Out* dst, std::size_t n, float hi_max, float lo_min,
                               bool stream) noexcept {
  const vf hm = f_set1(hi_max), lm = f_set1(lo_min);
  const bool nt = stream && reinterpret_cast<std::uintptr_t>(dst) % (sizeof(Out) * lanes) == 0;
  std::size_t k = 0;
  for (; k + lanes <= n; k += lanes) store_element_vector(dst + k, f_from_bits(u_load(src + k)), hm, lm, nt);
  return k;
}
inline std::size_t round_store_f32(const float* src, float* dst, std::size_t n, float hi_max, float lo_min,
                                   bool stream) noexcept {
  return round_store(src, dst, n, hi_max, lo_min, stream);
}
inline std::size_t round_store_bf16(const float* src, std::uint16_t* dst, std::size_t n, float hi_max,
                                    float lo_min, bool stream) noexcept {
  return round_store(src, dst, n, hi_max, lo_min, stream);
}

// Whole groups straight to dst as elements (dst[64 k + r] for group g0 + k), one vector
// store per value vector, without the pass through a buffer: Out is float or
// std::uint16_t (bfloat16 bits). Non-temporal only when dst is aligned to the vector;
// the values are the same either way. The direct writer of AVX2 for both, and of
// AVX-512 for bfloat16 (its float writer is lanes.hpp's line writer).
template <class Kernel, class Out>
inline void groups_to_elements_by_vector(const Kernel& p, const philox4x32_key& key, std::uint32_t domain,
                                         std::uint64_t g0, std::uint64_t count, Out* dst, float hi_max,
                                         float lo_min, bool stream) noexcept {
  const vf hm = f_set1(hi_max), lm = f_set1(lo_min);
  const bool nt = stream && reinterpret_cast<std::uintptr_t>(dst) % (sizeof(Out) * lanes) == 0;
  auto sink = [&](std::uint64_t unit, const vf (&v)[4]) {
    const std::uint64_t first_lane = unit * lanes;  // block offset from 16 g0
    Out* const at = dst + (first_lane / 16) * 64 + first_lane % 16;
    for (unsigned j = 0; j < 4; ++j) store_element_vector(at + 16 * j, v[j], hm, lm, nt);
  };
  drive_units(make_unit(p), key, domain, g0, count, sink);
}

}  // namespace kindling::detail::KINDLING_LANES_NAMESPACE
#undef KINDLING_LANES_NAMESPACE
#undef KINDLING_LANES_BODY_EMIT
#endif  // KINDLING_LANES_BODY_EMIT
