// AVX-512 (F, DQ, with FMA): the lane primitives of a 16-lane group, the generic body
// (lanes_body.hpp) on them, and what only this set has: the line writer of float
// elements with non-temporal stores, and the double normal (8 doubles a vector).
// Everything here is compiled for that target only; lanes.hpp calls it when
// instruction_set_available(instruction_set::avx512).
#ifndef KINDLING_RANDOM_DETAIL_AVX512_HPP
#define KINDLING_RANDOM_DETAIL_AVX512_HPP

#include <cstddef>
#include <cstdint>
#include <limits>
#include <type_traits>

#include "kindling/detail/dmath.hpp"
#include "kindling/random/detail/instruction_set.hpp"
#include "kindling/random/philox.hpp"

#if defined(KINDLING_LANES_X86)
#include <immintrin.h>

// GCC 12's AVX-512 intrinsics start from _mm512_undefined_*() (a self-initialized
// variable), which -Wmaybe-uninitialized reports once they are inlined here.
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wmaybe-uninitialized"
#pragma GCC diagnostic ignored "-Wuninitialized"
#endif

#if defined(__clang__)
#pragma clang attribute push(__attribute__((target("avx512f,avx512dq,fma"))), apply_to = function)
#else
#pragma GCC push_options
#pragma GCC target("avx512f,avx512dq,fma")
#endif
namespace kindling::detail::lanes_avx512 {
constexpr unsigned lanes = 16;
using vu = __m512i;
using vf = __m512;
using vm = __mmask16;
inline vu u_set1(std::uint32_t x) noexcept { return _mm512_set1_epi32(static_cast<int>(x)); }
inline vu u_iota() noexcept {
  return _mm512_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15);
}
inline vu u_add(vu a, vu b) noexcept { return _mm512_add_epi32(a, b); }
inline vu u_xor(vu a, vu b) noexcept { return _mm512_xor_si512(a, b); }
inline vu u_and(vu a, vu b) noexcept { return _mm512_and_si512(a, b); }
inline vu u_or(vu a, vu b) noexcept { return _mm512_or_si512(a, b); }
inline vu u_sub(vu a, vu b) noexcept { return _mm512_sub_epi32(a, b); }
template <int n>
inline vu u_srl(vu a) noexcept { return _mm512_srli_epi32(a, n); }
template <int n>
inline vu u_sll(vu a) noexcept { return _mm512_slli_epi32(a, n); }
inline vm u_eq(vu a, vu b) noexcept { return _mm512_cmpeq_epi32_mask(a, b); }
inline vm u_ge(vu a, vu b) noexcept { return _mm512_cmpge_epu32_mask(a, b); }
inline vu u_select(vm m, vu a, vu b) noexcept { return _mm512_mask_blend_epi32(m, b, a); }
// (hi, lo) of the 64-bit products a * m, lane by lane: even lanes by _mm512_mul_epu32,
// odd lanes shifted down into even position.
inline void u_mulhilo(vu a, std::uint32_t m, vu& hi, vu& lo) noexcept {
  const vu mv = u_set1(m);
  const vu even = _mm512_mul_epu32(a, mv);
  const vu odd = _mm512_mul_epu32(_mm512_srli_epi64(a, 32), mv);
  // Merge-masked dword shuffles: 0xA0 copies dword 0 of each pair up, 0xF5 dword 1 down.
  lo = _mm512_mask_shuffle_epi32(even, 0xAAAA, odd, static_cast<_MM_PERM_ENUM>(0xA0));
  hi = _mm512_mask_shuffle_epi32(odd, 0x5555, even, static_cast<_MM_PERM_ENUM>(0xF5));
}
inline vf f_set1(float x) noexcept { return _mm512_set1_ps(x); }
inline vf f_add(vf a, vf b) noexcept { return _mm512_add_ps(a, b); }
inline vf f_sub(vf a, vf b) noexcept { return _mm512_sub_ps(a, b); }
inline vf f_mul(vf a, vf b) noexcept { return _mm512_mul_ps(a, b); }
inline vf f_div(vf a, vf b) noexcept { return _mm512_div_ps(a, b); }
inline vf f_sqrt(vf a) noexcept { return _mm512_sqrt_ps(a); }
inline vf f_fma(vf a, vf b, vf c) noexcept { return _mm512_fmadd_ps(a, b, c); }
inline vf f_fnma(vf a, vf b, vf c) noexcept { return _mm512_fnmadd_ps(a, b, c); }  // fma(-a, b, c)
inline vf f_fms(vf a, vf b, vf c) noexcept { return _mm512_fmsub_ps(a, b, c); }    // fma(a, b, -c)
inline vf f_floor(vf a) noexcept {
  return _mm512_roundscale_ps(a, _MM_FROUND_TO_NEG_INF | _MM_FROUND_NO_EXC);
}
inline vf f_neg(vf a) noexcept {
  return _mm512_castsi512_ps(_mm512_xor_si512(_mm512_castps_si512(a), u_set1(0x80000000u)));
}
inline vf f_abs(vf a) noexcept {
  return _mm512_castsi512_ps(_mm512_and_si512(_mm512_castps_si512(a), u_set1(0x7fffffffu)));
}
// a with its sign flipped where bit 31 of s is set: (s & sign) ^ a in one ternary op.
inline vf f_flip_sign(vf a, vu s) noexcept {
  return _mm512_castsi512_ps(
      _mm512_ternarylogic_epi32(s, _mm512_castps_si512(a), u_set1(0x80000000u), 0x6c));
}
inline vf f_from_small_u(vu a) noexcept { return _mm512_cvtepi32_ps(a); }  // a < 2^31: exact
inline vf f_from_i(vu a) noexcept { return _mm512_cvtepi32_ps(a); }        // |a| < 2^24: exact
inline vu u_trunc_f(vf a) noexcept { return _mm512_cvttps_epi32(a); }
// The unbiased exponent of a positive normal float, as a float (exact).
inline vf f_exponent(vf a) noexcept { return _mm512_getexp_ps(a); }
inline vu u_bits(vf a) noexcept { return _mm512_castps_si512(a); }
inline vf f_from_bits(vu a) noexcept { return _mm512_castsi512_ps(a); }
inline vm f_lt(vf a, vf b) noexcept { return _mm512_cmp_ps_mask(a, b, _CMP_LT_OQ); }
inline vm f_le(vf a, vf b) noexcept { return _mm512_cmp_ps_mask(a, b, _CMP_LE_OQ); }
inline vm f_ge(vf a, vf b) noexcept { return _mm512_cmp_ps_mask(a, b, _CMP_GE_OQ); }
inline vm f_eq(vf a, vf b) noexcept { return _mm512_cmp_ps_mask(a, b, _CMP_EQ_OQ); }
inline vf f_select(vm m, vf a, vf b) noexcept { return _mm512_mask_blend_ps(m, b, a); }
inline vm m_and(vm a, vm b) noexcept { return static_cast<vm>(a & b); }
// Whether no lane is set in a or b (one kortest).
inline bool m_none_of(vm a, vm b) noexcept { return _kortestz_mask16_u8(a, b) != 0; }
inline void u_store(std::uint32_t* p, vu a) noexcept { _mm512_storeu_si512(p, a); }
inline void f_store(float* p, vf a) noexcept { _mm512_storeu_ps(p, a); }
inline vu u_load(const void* p) noexcept { return _mm512_loadu_si512(p); }
// Stores of finished elements; `stream`: non-temporal (p aligned to the vector size).
inline void u_store_elements(void* p, vu a, bool stream) noexcept {
  if (stream) {
    _mm512_stream_si512(static_cast<__m512i*>(p), a);
  } else {
    _mm512_storeu_si512(p, a);
  }
}
// The low 16 bits of each lane, packed (p aligned to lanes * 2 bytes when streaming).
inline void u16_store_elements(void* p, vu a, bool stream) noexcept {
  const __m256i packed = _mm512_cvtepi32_epi16(a);
  if (stream) {
    _mm256_stream_si256(static_cast<__m256i*>(p), packed);
  } else {
    _mm256_storeu_si256(static_cast<__m256i*>(p), packed);
  }
}
}  // namespace kindling::detail::lanes_avx512

// The generic body, written once against the primitives above.
#define KINDLING_LANES_WIDTH 16
#include "kindling/random/detail/lanes_body.hpp"
#undef KINDLING_LANES_WIDTH

namespace kindling::detail::lanes_avx512 {

// Stores consecutive vectors of float elements from dst on (16 k for the k-th vector)
// with non-temporal stores of the aligned 64-byte lines they cover whole: when dst is
// not aligned, each line is the end of one vector and the start of the next, put
// together by one permute; the partial lines at both ends get masked ordinary stores,
// so nothing outside the range is written.
class line_writer {
 public:
  explicit line_writer(float* dst) noexcept
      : misalign_(static_cast<unsigned>(reinterpret_cast<std::uintptr_t>(dst) % 64 / 4)),
        line_(dst - misalign_),
        index_(_mm512_add_epi32(u_iota(), u_set1(16u - misalign_))) {}
  void put(vu x) noexcept {
    if (misalign_ == 0) {
      _mm512_stream_si512(reinterpret_cast<__m512i*>(line_), x);
    } else {
      const vu y = _mm512_permutex2var_epi32(previous_, index_, x);
      if (started_) {
        _mm512_stream_si512(reinterpret_cast<__m512i*>(line_), y);
      } else {
        _mm512_mask_storeu_epi32(line_, static_cast<vm>(0xffffu << misalign_), y);
      }
      previous_ = x;
    }
    started_ = true;
    line_ += 16;
  }
  // The last partial line (the end of the last vector).
  void finish() noexcept {
    if (misalign_ != 0 && started_) {
      const vu y = _mm512_permutex2var_epi32(previous_, index_, previous_);
      _mm512_mask_storeu_epi32(line_, static_cast<vm>((1u << misalign_) - 1u), y);
    }
  }

 private:
  unsigned misalign_;  // floats from the line start to dst
  float* line_;
  vu index_;
  vu previous_ = _mm512_setzero_si512();
  bool started_ = false;
};

// Whole groups of the distribution with parameters p written as float elements to dst
// (dst[64 k + r] for group g0 + k): each value moved inside [lo_min, hi_max] as
// round_store_f32 does, then stored, without the pass through a buffer. A unit is a
// whole group here (16 lanes), so the vectors come in memory order.
template <class Kernel>
inline void groups_to_elements(const Kernel& p, const philox4x32_key& key, std::uint32_t domain,
                               std::uint64_t g0, std::uint64_t count, float* dst, float hi_max,
                               float lo_min, bool stream) noexcept {
  const vf hm = f_set1(hi_max), lm = f_set1(lo_min);
  if (stream) {
    line_writer out(dst);
    auto sink = [&](std::uint64_t, const vf (&v)[4]) {
      for (unsigned j = 0; j < 4; ++j) out.put(inside_f32(u_bits(v[j]), hm, lm));
    };
    drive_units(make_unit(p), key, domain, g0, count, sink);
    out.finish();
  } else {
    auto sink = [&](std::uint64_t unit, const vf (&v)[4]) {
      for (unsigned j = 0; j < 4; ++j)
        _mm512_storeu_si512(dst + 64 * unit + 16 * j, inside_f32(u_bits(v[j]), hm, lm));
    };
    drive_units(make_unit(p), key, domain, g0, count, sink);
  }
}

// ---- double normal, 8 lanes a vector (AVX-512F/DQ) ------------------------------------
// sample.hpp normal_kernel<double> on whole groups: a group is 16 blocks x 2 slots,
// element r = 16 slot + lane; slot 0 takes words (w0, w1) of each block, slot 1 (w2, w3).
// dmath.hpp's log, sincos_2pi and Horner's rule transcribed as in the float path.
using vd = __m512d;

template <std::size_t N>
inline vd d_horner(vd x, const double (&c)[N]) noexcept {
  vd p = _mm512_set1_pd(c[N - 1]);
  for (std::size_t i = N - 1; i-- > 0;) p = _mm512_fmadd_pd(p, x, _mm512_set1_pd(c[i]));
  return p;
}

// ((w_a << 32) | w_b) >> 11 of blocks h .. h + 7 (h = 0 or 8), as exact doubles.
inline vd d_variate_integers(vu a, vu b, unsigned h) noexcept {
  // Dword 2i of the result from b (lane h + i), dword 2i + 1 from a (index 16 + h + i).
  const vu index = _mm512_add_epi32(
      _mm512_setr_epi32(0, 16, 1, 17, 2, 18, 3, 19, 4, 20, 5, 21, 6, 22, 7, 23), u_set1(h));
  return _mm512_cvtepu64_pd(_mm512_srli_epi64(_mm512_permutex2var_epi32(b, index, a), 11));
}

// dmath.hpp log<double> for normal x > 0 (here x >= 2^-53): the split as in
// lanes_body.hpp log_lanes, one 64-bit add carrying into the exponent exactly when the
// fraction is >= sqrt2_fraction.
inline vd d_log_normal(vd x) noexcept {
  using K = kernel_constants<double>;
  constexpr std::uint64_t half_sqrt2 = 0x3fe0000000000000u | K::sqrt2_fraction;
  const __m512i shifted =
      _mm512_add_epi64(_mm512_castpd_si512(x), _mm512_set1_epi64(static_cast<long long>(0x3ff0000000000000u - half_sqrt2)));
  const __m512i k = _mm512_sub_epi64(_mm512_srli_epi64(shifted, 52), _mm512_set1_epi64(1023));
  const vd m = _mm512_castsi512_pd(_mm512_add_epi64(
      _mm512_and_si512(shifted, _mm512_set1_epi64(static_cast<long long>((std::uint64_t{1} << 52) - 1u))),
      _mm512_set1_epi64(static_cast<long long>(half_sqrt2))));
  const vd one = _mm512_set1_pd(1.0);
  const vd f = _mm512_sub_pd(m, one);
  const vd s = _mm512_div_pd(f, _mm512_add_pd(_mm512_set1_pd(2.0), f));
  const vd z = _mm512_mul_pd(s, s);
  const vd f_minus_r = _mm512_fnmadd_pd(z, d_horner(z, K::log_r), f);
  const vd log1pf = _mm512_fnmadd_pd(s, f_minus_r, f);
  const vd kt = _mm512_cvtepi64_pd(k);
  return _mm512_fmadd_pd(kt, _mm512_set1_pd(K::ln2_hi),
                         _mm512_fmadd_pd(kt, _mm512_set1_pd(K::ln2_lo), log1pf));
}

// dmath.hpp sincos_2pi<double> of u = kd 2^-53 (4 u = kd 2^-51 exactly).
inline void d_sincos_2pi_units(vd kd, vd& sin_out, vd& cos_out) noexcept {
  using K = kernel_constants<double>;
  const vd scale = _mm512_set1_pd(0x1p-51);
  const vd q = _mm512_roundscale_pd(_mm512_fmadd_pd(kd, scale, _mm512_set1_pd(0.5)),
                                    _MM_FROUND_TO_NEG_INF | _MM_FROUND_NO_EXC);
  const vd t = _mm512_fmsub_pd(kd, scale, q);
  const vd t2 = _mm512_mul_pd(t, t);
  const vd s = _mm512_mul_pd(t, d_horner(t2, K::sin_c));
  const vd c = d_horner(t2, K::cos_c);
  const __m512i qi = _mm512_cvttpd_epi64(q);
  const __mmask8 odd = _mm512_test_epi64_mask(qi, _mm512_set1_epi64(1));
  const __m512i sign = _mm512_set1_epi64(static_cast<long long>(0x8000000000000000u));
  // Flip the sign where bit 1 of q (sin) or of q + 1 (cos) is set: (a & sign) ^ mag.
  const __m512i sin_mag = _mm512_castpd_si512(_mm512_mask_blend_pd(odd, s, c));
  const __m512i cos_mag = _mm512_castpd_si512(_mm512_mask_blend_pd(odd, c, s));
  sin_out = _mm512_castsi512_pd(_mm512_ternarylogic_epi64(_mm512_slli_epi64(qi, 62), sin_mag, sign, 0x6c));
  cos_out = _mm512_castsi512_pd(_mm512_ternarylogic_epi64(
      _mm512_slli_epi64(_mm512_add_epi64(qi, _mm512_set1_epi64(1)), 62), cos_mag, sign, 0x6c));
}

inline void normal_f64_unit(const vu (&w)[4], vd mean, vd stddev, double* at) noexcept {
  for (unsigned h = 0; h < 16; h += 8) {
    const vd k1 = d_variate_integers(w[0], w[1], h), k2 = d_variate_integers(w[2], w[3], h);
    const vd one_minus_u1 = _mm512_fnmadd_pd(k1, _mm512_set1_pd(0x1p-53), _mm512_set1_pd(1.0));
    const vd r = _mm512_sqrt_pd(_mm512_mul_pd(_mm512_set1_pd(-2.0), d_log_normal(one_minus_u1)));
    vd sin_v, cos_v;
    d_sincos_2pi_units(k2, sin_v, cos_v);
    _mm512_storeu_pd(at + h, _mm512_fmadd_pd(stddev, _mm512_mul_pd(r, cos_v), mean));
    _mm512_storeu_pd(at + 16 + h, _mm512_fmadd_pd(stddev, _mm512_mul_pd(r, sin_v), mean));
  }
}

// Whole groups of the double normal, out[32 k + r] for group g0 + k.
template <class C>
inline void normal_groups_f64(const normal_kernel<C>& p, const philox4x32_key& key,
                              std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                              double* out) noexcept {
  static_assert(std::is_same<C, double>::value, "the double normal");
  const vd mean = _mm512_set1_pd(p.mean), stddev = _mm512_set1_pd(p.stddev);
  constexpr unsigned batch = 4;
  std::uint64_t u = 0;
  for (; u + batch <= count; u += batch) {
    vu x[batch][4];
    philox_units<batch>(key, domain, 16 * (g0 + u), x);
    for (unsigned k = 0; k < batch; ++k) normal_f64_unit(x[k], mean, stddev, out + 32 * (u + k));
  }
  for (; u < count; ++u) {
    vu x[1][4];
    philox_units<1>(key, domain, 16 * (g0 + u), x);
    normal_f64_unit(x[0], mean, stddev, out + 32 * u);
  }
}
}  // namespace kindling::detail::lanes_avx512
#if defined(__clang__)
#pragma clang attribute pop
#else
#pragma GCC pop_options
#endif

#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC diagnostic pop
#endif

#endif  // KINDLING_LANES_X86

#endif  // KINDLING_RANDOM_DETAIL_AVX512_HPP
