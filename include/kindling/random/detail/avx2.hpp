// AVX2 with FMA: the lane primitives of an 8-lane half group and the generic body
// (lanes_body.hpp) on them. Compiled for that target only; lanes.hpp calls it when
// instruction_set_available(instruction_set::avx2).
#ifndef KINDLING_RANDOM_DETAIL_AVX2_HPP
#define KINDLING_RANDOM_DETAIL_AVX2_HPP

#include <cstddef>
#include <cstdint>
#include <limits>
#include <type_traits>

#include "kindling/detail/dmath.hpp"
#include "kindling/random/detail/instruction_set.hpp"
#include "kindling/random/philox.hpp"

#if defined(KINDLING_LANES_X86)
#include <immintrin.h>

#if defined(__clang__)
#pragma clang attribute push(__attribute__((target("avx2,fma"))), apply_to = function)
#else
#pragma GCC push_options
#pragma GCC target("avx2,fma")
#endif
namespace kindling::detail::lanes_avx2 {
constexpr unsigned lanes = 8;
using vu = __m256i;
using vf = __m256;
using vm = __m256i;  // all-ones / all-zeros lanes
inline vu u_set1(std::uint32_t x) noexcept { return _mm256_set1_epi32(static_cast<int>(x)); }
inline vu u_iota() noexcept { return _mm256_setr_epi32(0, 1, 2, 3, 4, 5, 6, 7); }
inline vu u_add(vu a, vu b) noexcept { return _mm256_add_epi32(a, b); }
inline vu u_xor(vu a, vu b) noexcept { return _mm256_xor_si256(a, b); }
inline vu u_and(vu a, vu b) noexcept { return _mm256_and_si256(a, b); }
inline vu u_or(vu a, vu b) noexcept { return _mm256_or_si256(a, b); }
inline vu u_sub(vu a, vu b) noexcept { return _mm256_sub_epi32(a, b); }
template <int n>
inline vu u_srl(vu a) noexcept { return _mm256_srli_epi32(a, n); }
template <int n>
inline vu u_sll(vu a) noexcept { return _mm256_slli_epi32(a, n); }
inline vm u_eq(vu a, vu b) noexcept { return _mm256_cmpeq_epi32(a, b); }
// Unsigned a >= b: max(a, b) == a.
inline vm u_ge(vu a, vu b) noexcept { return _mm256_cmpeq_epi32(_mm256_max_epu32(a, b), a); }
inline vu u_select(vm m, vu a, vu b) noexcept { return _mm256_blendv_epi8(b, a, m); }
inline void u_mulhilo(vu a, std::uint32_t m, vu& hi, vu& lo) noexcept {
  const vu mv = u_set1(m);
  const vu even = _mm256_mul_epu32(a, mv);
  const vu odd = _mm256_mul_epu32(_mm256_srli_epi64(a, 32), mv);
  lo = _mm256_blend_epi32(even, _mm256_slli_epi64(odd, 32), 0xAA);
  hi = _mm256_blend_epi32(_mm256_srli_epi64(even, 32), odd, 0xAA);
}
inline vf f_set1(float x) noexcept { return _mm256_set1_ps(x); }
inline vf f_add(vf a, vf b) noexcept { return _mm256_add_ps(a, b); }
inline vf f_sub(vf a, vf b) noexcept { return _mm256_sub_ps(a, b); }
inline vf f_mul(vf a, vf b) noexcept { return _mm256_mul_ps(a, b); }
inline vf f_div(vf a, vf b) noexcept { return _mm256_div_ps(a, b); }
inline vf f_sqrt(vf a) noexcept { return _mm256_sqrt_ps(a); }
inline vf f_fma(vf a, vf b, vf c) noexcept { return _mm256_fmadd_ps(a, b, c); }
inline vf f_fnma(vf a, vf b, vf c) noexcept { return _mm256_fnmadd_ps(a, b, c); }  // fma(-a, b, c)
inline vf f_fms(vf a, vf b, vf c) noexcept { return _mm256_fmsub_ps(a, b, c); }    // fma(a, b, -c)
inline vf f_floor(vf a) noexcept { return _mm256_floor_ps(a); }
inline vf f_neg(vf a) noexcept {
  return _mm256_castsi256_ps(_mm256_xor_si256(_mm256_castps_si256(a), u_set1(0x80000000u)));
}
inline vf f_abs(vf a) noexcept {
  return _mm256_castsi256_ps(_mm256_and_si256(_mm256_castps_si256(a), u_set1(0x7fffffffu)));
}
inline vf f_flip_sign(vf a, vu s) noexcept {
  return _mm256_castsi256_ps(
      _mm256_xor_si256(_mm256_castps_si256(a), _mm256_and_si256(s, u_set1(0x80000000u))));
}
inline vf f_from_small_u(vu a) noexcept { return _mm256_cvtepi32_ps(a); }
inline vf f_from_i(vu a) noexcept { return _mm256_cvtepi32_ps(a); }
inline vu u_trunc_f(vf a) noexcept { return _mm256_cvttps_epi32(a); }
inline vf f_exponent(vf a) noexcept {
  return _mm256_cvtepi32_ps(
      _mm256_sub_epi32(_mm256_srli_epi32(_mm256_castps_si256(a), 23), _mm256_set1_epi32(127)));
}
inline vu u_bits(vf a) noexcept { return _mm256_castps_si256(a); }
inline vf f_from_bits(vu a) noexcept { return _mm256_castsi256_ps(a); }
inline vm f_lt(vf a, vf b) noexcept { return _mm256_castps_si256(_mm256_cmp_ps(a, b, _CMP_LT_OQ)); }
inline vm f_le(vf a, vf b) noexcept { return _mm256_castps_si256(_mm256_cmp_ps(a, b, _CMP_LE_OQ)); }
inline vm f_ge(vf a, vf b) noexcept { return _mm256_castps_si256(_mm256_cmp_ps(a, b, _CMP_GE_OQ)); }
inline vm f_eq(vf a, vf b) noexcept { return _mm256_castps_si256(_mm256_cmp_ps(a, b, _CMP_EQ_OQ)); }
inline vf f_select(vm m, vf a, vf b) noexcept { return _mm256_blendv_ps(b, a, _mm256_castsi256_ps(m)); }
inline vm m_and(vm a, vm b) noexcept { return _mm256_and_si256(a, b); }
inline bool m_none_of(vm a, vm b) noexcept {
  const vm both = _mm256_or_si256(a, b);
  return _mm256_testz_si256(both, both) != 0;
}
inline void u_store(std::uint32_t* p, vu a) noexcept {
  _mm256_storeu_si256(reinterpret_cast<__m256i*>(p), a);
}
inline void f_store(float* p, vf a) noexcept { _mm256_storeu_ps(p, a); }
inline vu u_load(const void* p) noexcept { return _mm256_loadu_si256(static_cast<const __m256i*>(p)); }
inline void u_store_elements(void* p, vu a, bool stream) noexcept {
  if (stream) {
    _mm256_stream_si256(static_cast<__m256i*>(p), a);
  } else {
    _mm256_storeu_si256(static_cast<__m256i*>(p), a);
  }
}
inline void u16_store_elements(void* p, vu a, bool stream) noexcept {
  // packus works within 128-bit halves: (a0..a3, a0..a3 | a4..a7, a4..a7); gather 0 and 2.
  const __m256i packed = _mm256_permute4x64_epi64(_mm256_packus_epi32(a, a), 0x08);
  const __m128i low = _mm256_castsi256_si128(packed);
  if (stream) {
    _mm_stream_si128(static_cast<__m128i*>(p), low);
  } else {
    _mm_storeu_si128(static_cast<__m128i*>(p), low);
  }
}
}  // namespace kindling::detail::lanes_avx2

// The generic body, written once against the primitives above.
#define KINDLING_LANES_WIDTH 8
#include "kindling/random/detail/lanes_body.hpp"
#undef KINDLING_LANES_WIDTH
#if defined(__clang__)
#pragma clang attribute pop
#else
#pragma GCC pop_options
#endif

#endif  // KINDLING_LANES_X86

#endif  // KINDLING_RANDOM_DETAIL_AVX2_HPP
