// Philox counter-based random bits: pure block functions, and kindling's counter blocks.
// The C++26-style engines over them are in random/philox_engine.hpp.
//
// Philox (Salmon, Moraes, Dror & Shaw, "Parallel Random Numbers: As Easy as 1, 2, 3",
// SC'11) is a keyed bijection of an n-word counter.  A block function maps
// (counter, key) to n words and keeps no state: equal inputs give equal outputs, and
// distinct counters under one key give distinct outputs.  Everything stateful (the
// engines of philox_engine.hpp, the streams in stream.hpp) sits above it.
//
// Counter and key layout of the block functions is Random123's (librandom123-dev,
// Random123/philox.h): word 0 of the counter is the first word of the r123array, and
// one round of Philox4xW is
//
//   (hi0, lo0) = M0 * x[2]            (hi1, lo1) = M1 * x[0]      (full 2W-bit products)
//   x' = (hi0 ^ x[1] ^ k[0],  lo0,  hi1 ^ x[3] ^ k[1],  lo1)
//   k  = (k[0] + C0, k[1] + C1)  mod 2^W                          (before the next round)
//
// and one round of Philox2xW is (hi, lo) = M0 * x[0]; x' = (hi ^ x[1] ^ k[0], lo).
// Constants: 4x32 M0 = 0xCD9E8D57, M1 = 0xD2511F53; 4x64 M0 = 0xCA5A826395121157,
// M1 = 0xD2E7470EE14C6C93; C0 = 0x9E3779B9 / 0x9E3779B97F4A7C15 (golden ratio),
// C1 = 0xBB67AE85 / 0xBB67AE8584CAA73B (sqrt(3) - 1).  Random123 names M0 and M1 the
// other way round (its PHILOX_M4x32_1 is our M0); we index them as C++26
// std::philox_engine does (from memory of N5014), where M_k pairs with key word k.
#ifndef KINDLING_RANDOM_PHILOX_HPP
#define KINDLING_RANDOM_PHILOX_HPP

#include <array>
#include <cstddef>
#include <cstdint>
#include <limits>
#include <type_traits>

namespace kindling {

using philox4x32_counter = std::array<std::uint32_t, 4>;
using philox4x32_key = std::array<std::uint32_t, 2>;
using philox4x64_counter = std::array<std::uint64_t, 4>;
using philox4x64_key = std::array<std::uint64_t, 2>;

namespace detail {

// The narrowest exact type that holds a w-bit word.
template <std::size_t w>
using philox_word_t = std::conditional_t<(w <= 32), std::uint32_t, std::uint64_t>;

template <class Word, std::size_t w>
inline constexpr Word philox_mask = w == std::numeric_limits<Word>::digits
                                        ? static_cast<Word>(~Word{0})
                                        : static_cast<Word>((Word{1} << w) - 1u);

// High and low w bits of the 2w-bit product a * b (a, b < 2^w).
template <std::size_t w>
constexpr void philox_mulhilo(std::uint32_t a, std::uint32_t b, std::uint32_t& hi,
                              std::uint32_t& lo) noexcept {
  const std::uint64_t p = std::uint64_t{a} * b;
  hi = static_cast<std::uint32_t>(p >> w);
  lo = static_cast<std::uint32_t>(p) & philox_mask<std::uint32_t, w>;
}

template <std::size_t w>
constexpr void philox_mulhilo(std::uint64_t a, std::uint64_t b, std::uint64_t& hi,
                              std::uint64_t& lo) noexcept {
  static_assert(w > 32 && w <= 64, "64-bit words serve 32 < w <= 64");
#if defined(__SIZEOF_INT128__)
  __extension__ using u128 = unsigned __int128;
  const u128 p = static_cast<u128>(a) * b;
  const std::uint64_t p_lo = static_cast<std::uint64_t>(p);
  const std::uint64_t p_hi = static_cast<std::uint64_t>(p >> 64);
#else
  // Portable schoolbook product from 32-bit halves.
  const std::uint64_t a_lo = a & 0xffffffffu, a_hi = a >> 32;
  const std::uint64_t b_lo = b & 0xffffffffu, b_hi = b >> 32;
  const std::uint64_t ll = a_lo * b_lo, lh = a_lo * b_hi, hl = a_hi * b_lo, hh = a_hi * b_hi;
  const std::uint64_t mid = (ll >> 32) + (lh & 0xffffffffu) + (hl & 0xffffffffu);
  const std::uint64_t p_lo = (mid << 32) | (ll & 0xffffffffu);
  const std::uint64_t p_hi = hh + (lh >> 32) + (hl >> 32) + (mid >> 32);
#endif
  if constexpr (w == 64) {
    hi = p_hi;
    lo = p_lo;
  } else {
    hi = (p_hi << (64 - w)) | (p_lo >> w);
    lo = p_lo & philox_mask<std::uint64_t, w>;
  }
}

// r rounds of Philox-n-w on counter x with key k; m and c are the multipliers and
// key increments (the round layout is spelled out at the top of this file).
template <class Word, std::size_t w, std::size_t n, std::size_t r>
constexpr std::array<Word, n> philox_rounds(std::array<Word, n> x, std::array<Word, n / 2> k,
                                            const std::array<Word, n / 2>& m,
                                            const std::array<Word, n / 2>& c) noexcept {
  static_assert(n == 2 || n == 4, "Philox is defined here for 2 or 4 words");
  constexpr Word mask = philox_mask<Word, w>;
  for (std::size_t round = 0; round < r; ++round) {
    if (round != 0) {
      for (std::size_t j = 0; j < n / 2; ++j) k[j] = static_cast<Word>(k[j] + c[j]) & mask;
    }
    if constexpr (n == 2) {
      Word hi{}, lo{};
      philox_mulhilo<w>(m[0], x[0], hi, lo);
      x = {static_cast<Word>(hi ^ x[1] ^ k[0]), lo};
    } else {
      Word hi0{}, lo0{}, hi1{}, lo1{};
      philox_mulhilo<w>(m[0], x[2], hi0, lo0);
      philox_mulhilo<w>(m[1], x[0], hi1, lo1);
      x = {static_cast<Word>(hi0 ^ x[1] ^ k[0]), lo0, static_cast<Word>(hi1 ^ x[3] ^ k[1]), lo1};
    }
  }
  return x;
}

}  // namespace detail

// The constants of the header comment, named once: the block functions below, the
// engines (philox_engine.hpp) and the vector Philox (random/detail/lanes_body.hpp) read
// them from here. Checked against Random123's known-answer vectors (tests/random/philox.cpp).
inline constexpr std::array<std::uint32_t, 2> philox4x32_multipliers{0xCD9E8D57u, 0xD2511F53u};
inline constexpr std::array<std::uint32_t, 2> philox4x32_key_increments{0x9E3779B9u, 0xBB67AE85u};
inline constexpr std::array<std::uint64_t, 2> philox4x64_multipliers{0xCA5A826395121157u,
                                                                     0xD2E7470EE14C6C93u};
inline constexpr std::array<std::uint64_t, 2> philox4x64_key_increments{0x9E3779B97F4A7C15u,
                                                                        0xBB67AE8584CAA73Bu};
inline constexpr unsigned philox_rounds_count = 10;

// Philox4x32-10 of (counter, key), word order as Random123's philox4x32.
constexpr philox4x32_counter philox4x32_block(const philox4x32_counter& ctr,
                                              const philox4x32_key& key) noexcept {
  return detail::philox_rounds<std::uint32_t, 32, 4, philox_rounds_count>(
      ctr, key, philox4x32_multipliers, philox4x32_key_increments);
}

// Philox4x64-10 of (counter, key), word order as Random123's philox4x64.
constexpr philox4x64_counter philox4x64_block(const philox4x64_counter& ctr,
                                              const philox4x64_key& key) noexcept {
  return detail::philox_rounds<std::uint64_t, 64, 4, philox_rounds_count>(
      ctr, key, philox4x64_multipliers, philox4x64_key_increments);
}

// ---- kindling's counter blocks (reproducibility format, DEVELOPERS.md "Counter blocks")

/// Version of the reproducibility format; the last counter word of every block.
inline constexpr std::uint32_t format_version = 1;

/// The counter of block `block` of domain `domain`: (block mod 2^32, block >> 32,
/// domain, format_version), in Random123's word order. Every path (scalar, vector,
/// stream::block) builds its counters here.
constexpr philox4x32_counter counter_of(std::uint32_t domain, std::uint64_t block) noexcept {
  return {static_cast<std::uint32_t>(block), static_cast<std::uint32_t>(block >> 32), domain,
          format_version};
}

}  // namespace kindling

#endif  // KINDLING_RANDOM_PHILOX_HPP
