// Counter groups in SIMD lanes: the dispatch. The 16 Philox4x32-10 blocks of a group
// computed side by side, and the float transforms of random/sample.hpp on whole vectors,
// on the instruction set chosen at run time (random/detail/instruction_set.hpp).
//
// Why it keeps every bit: the vector code is a transcription of the scalar code
// (philox.hpp, dmath.hpp, sample.hpp, element.hpp), operation for operation in the same
// order. Integer steps are exact; the floating-point steps are +, -, *, /, sqrt and fma,
// all correctly rounded in IEEE arithmetic, so a vector lane and the scalar path give
// the same result. Products feed additions only through an explicit fma, as in
// dmath.hpp, so floating-point contraction has nothing to fuse. Branches of the scalar
// code become both sides computed and a per-lane select.
//
// Layout: a group is 16 blocks (lanes) x 4 words (slots); element r = 16 slot + lane of
// a float group is word `slot` of block `lane` (DEVELOPERS.md "Element index and
// words"), so the vector of word j of the 16 blocks is elements 16 j .. 16 j + 15, stored
// without a transpose.
//
// The code per instruction set, the way Eigen splits its arch/ folders:
//   random/detail/instruction_set.hpp   which sets exist, which one this CPU runs
//   random/detail/avx512.hpp, avx2.hpp  the lane primitives of each set (+ its extras)
//   random/detail/lanes_body.hpp        the generic functions, written once against them
//   random/detail/lanes.hpp (this)      the dispatch, with the scalar fallbacks
#ifndef KINDLING_RANDOM_DETAIL_LANES_HPP
#define KINDLING_RANDOM_DETAIL_LANES_HPP

#include <cstddef>
#include <cstdint>
#include <type_traits>

#include "kindling/random/detail/instruction_set.hpp"
#include "kindling/random/philox.hpp"

// Header-only, the dispatch below is inline; in compiled mode (detail/compiled_mode.hpp)
// it is only declared here, and defined once in the compiled library, so that a user's
// file parses neither the intrinsics headers nor the kernels.
#include "kindling/detail/compiled_mode.hpp"
#if defined(KINDLING_COMPILED_DEFINITIONS)
#include "kindling/random/detail/avx2.hpp"
#include "kindling/random/detail/avx512.hpp"
#if defined(KINDLING_LANES_X86)
#include <immintrin.h>
#endif
#endif

namespace kindling::detail {


// The words of the 16 blocks of group g, slot-major: w[16 j + lane] = word j of block
// 16 g + lane. Scalar reference of group_words_lanes.
inline void group_words_scalar(const philox4x32_key& key, std::uint32_t domain, std::uint64_t g,
                               std::uint32_t* w) noexcept {
  for (unsigned lane = 0; lane < 16; ++lane) {
    const std::uint64_t b = 16 * g + lane;
    const philox4x32_counter x = philox4x32_block(counter_of(domain, b), key);
    for (unsigned j = 0; j < 4; ++j) w[16 * j + lane] = x[j];
  }
}

// ---- the dispatch: what fill.hpp and sample.hpp call ---------------------------------
// Declared here, defined below (header-only) or in the compiled library (compiled mode).

// Group words on the given path (instruction_set_available(isa) must hold).
KINDLING_COMPILED_INLINE void group_words(instruction_set isa, const philox4x32_key& key,
                                       std::uint32_t domain, std::uint64_t g, std::uint32_t* w) noexcept;

// The float transforms on `count` whole groups from g0, out[64 k + r] for group g0 + k.
// Return false when the path has no vector code (the caller then runs the scalar one).
template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_f32(instruction_set isa, const Kernel& p, const philox4x32_key& key,
                                      std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                                      float* out) noexcept;

// The double normal (sample.hpp normal_kernel<double>) on whole groups, out[32 k + r]
// for group g0 + k (AVX-512 only).
template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_f64(instruction_set isa, const Kernel& p, const philox4x32_key& key,
                                      std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                                      double* out) noexcept;

// The same groups as float elements straight into dst, each moved inside [lo_min,
// hi_max] as round_store_f32 does; `stream`: non-temporal stores. False when the path
// has no such writer (the caller then generates into a buffer and rounds from there).
template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_f32_elements(instruction_set isa, const Kernel& p,
                                               const philox4x32_key& key, std::uint32_t domain,
                                               std::uint64_t g0, std::uint64_t count, float* dst,
                                               float hi_max, float lo_min, bool stream) noexcept;

// The same for bfloat16 elements (their bits), rounded as round_store_bf16 does.
template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_bf16_elements(instruction_set isa, const Kernel& p,
                                                const philox4x32_key& key, std::uint32_t domain,
                                                std::uint64_t g0, std::uint64_t count,
                                                std::uint16_t* dst, float hi_max, float lo_min,
                                                bool stream) noexcept;

// element_traits<float / bfloat16>::from_compute of src[0 .. n) into dst, with the
// distribution's bounds given as thresholds in float: hi_max (lo_min) is the largest
// (smallest) float inside them, so "outside above" is t > hi_max and "outside below"
// t < lo_min for the exact value t of the rounded element. Vector paths handle a
// multiple of their width and return how many they wrote; the caller does the rest.
// `stream`: non-temporal stores (used when dst is aligned to the vector size).
KINDLING_COMPILED_INLINE std::size_t round_store_f32(instruction_set isa, const float* src, float* dst,
                                                  std::size_t n, float hi_max, float lo_min,
                                                  bool stream) noexcept;
KINDLING_COMPILED_INLINE std::size_t round_store_bf16(instruction_set isa, const float* src,
                                                   std::uint16_t* dst, std::size_t n, float hi_max,
                                                   float lo_min, bool stream) noexcept;

// Orders the non-temporal stores before what follows (the end of an executor task).
KINDLING_COMPILED_INLINE void store_fence() noexcept;

#if defined(KINDLING_COMPILED_DEFINITIONS)
// The definitions (comments on the declarations above).
KINDLING_COMPILED_INLINE void group_words(instruction_set isa, const philox4x32_key& key, std::uint32_t domain,
                                       std::uint64_t g, std::uint32_t* w) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512) return lanes_avx512::group_words(key, domain, g, w);
  if (isa == instruction_set::avx2) return lanes_avx2::group_words(key, domain, g, w);
#endif
  (void)isa;
  group_words_scalar(key, domain, g, w);
}

template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_f32(instruction_set isa, const Kernel& p, const philox4x32_key& key,
                                      std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                                      float* out) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512) return lanes_avx512::groups(p, key, domain, g0, count, out), true;
  if (isa == instruction_set::avx2) return lanes_avx2::groups(p, key, domain, g0, count, out), true;
#endif
  (void)isa, (void)p, (void)key, (void)domain, (void)g0, (void)count, (void)out;
  return false;
}

template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_f64(instruction_set isa, const Kernel& p, const philox4x32_key& key,
                                      std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                                      double* out) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512)
    return lanes_avx512::normal_groups_f64(p, key, domain, g0, count, out), true;
#endif
  (void)isa, (void)p, (void)key, (void)domain, (void)g0, (void)count, (void)out;
  return false;
}

template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_f32_elements(instruction_set isa, const Kernel& p, const philox4x32_key& key,
                                               std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                                               float* dst, float hi_max, float lo_min, bool stream) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512)
    return lanes_avx512::groups_to_elements(p, key, domain, g0, count, dst, hi_max, lo_min, stream),
           true;
  if (isa == instruction_set::avx2)
    return lanes_avx2::groups_to_elements_by_vector(p, key, domain, g0, count, dst, hi_max, lo_min,
                                                    stream),
           true;
#endif
  (void)isa, (void)p, (void)key, (void)domain, (void)g0, (void)count, (void)dst, (void)hi_max,
      (void)lo_min, (void)stream;
  return false;
}

template <class Kernel>
KINDLING_COMPILED_INLINE bool groups_bf16_elements(instruction_set isa, const Kernel& p, const philox4x32_key& key,
                                                std::uint32_t domain, std::uint64_t g0, std::uint64_t count,
                                                std::uint16_t* dst, float hi_max, float lo_min, bool stream) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512)
    return lanes_avx512::groups_to_elements_by_vector(p, key, domain, g0, count, dst, hi_max, lo_min, stream),
           true;
  if (isa == instruction_set::avx2)
    return lanes_avx2::groups_to_elements_by_vector(p, key, domain, g0, count, dst, hi_max, lo_min, stream),
           true;
#endif
  (void)isa, (void)p, (void)key, (void)domain, (void)g0, (void)count, (void)dst, (void)hi_max,
      (void)lo_min, (void)stream;
  return false;
}

KINDLING_COMPILED_INLINE std::size_t round_store_f32(instruction_set isa, const float* src, float* dst,
                                                  std::size_t n, float hi_max, float lo_min,
                                                  bool stream) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512)
    return lanes_avx512::round_store_f32(src, dst, n, hi_max, lo_min, stream);
  if (isa == instruction_set::avx2)
    return lanes_avx2::round_store_f32(src, dst, n, hi_max, lo_min, stream);
#endif
  (void)isa, (void)src, (void)dst, (void)n, (void)hi_max, (void)lo_min, (void)stream;
  return 0;
}
KINDLING_COMPILED_INLINE std::size_t round_store_bf16(instruction_set isa, const float* src, std::uint16_t* dst,
                                                   std::size_t n, float hi_max, float lo_min,
                                                   bool stream) noexcept {
#if defined(KINDLING_LANES_X86)
  if (isa == instruction_set::avx512)
    return lanes_avx512::round_store_bf16(src, dst, n, hi_max, lo_min, stream);
  if (isa == instruction_set::avx2)
    return lanes_avx2::round_store_bf16(src, dst, n, hi_max, lo_min, stream);
#endif
  (void)isa, (void)src, (void)dst, (void)n, (void)hi_max, (void)lo_min, (void)stream;
  return 0;
}
KINDLING_COMPILED_INLINE void store_fence() noexcept {
#if defined(KINDLING_LANES_X86)
  _mm_sfence();
#endif
}
#endif  // KINDLING_COMPILED_DEFINITIONS
}  // namespace kindling::detail

#endif  // KINDLING_RANDOM_DETAIL_LANES_HPP
