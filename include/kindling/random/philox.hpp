// Philox counter-based random bits: pure block functions and C++26-style engines.
//
// Philox (Salmon, Moraes, Dror & Shaw, "Parallel Random Numbers: As Easy as 1, 2, 3",
// SC'11) is a keyed bijection of an n-word counter.  A block function maps
// (counter, key) to n words and keeps no state: equal inputs give equal outputs, and
// distinct counters under one key give distinct outputs.  Everything stateful (the
// engines below, the streams in stream.hpp) sits above it.
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
#include <ios>
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

// An engine with the interface and semantics of C++26 std::philox_engine
// ([rand.eng.philox], N5014 29.5.4.5; written from memory of the working draft and
// checked against its [rand.predef] 10000th-output values).
//
// consts = M0, C0, M1, C1 (n = 4) or M0, C0 (n = 2).  The state is a counter X of n
// w-bit words, read as the n*w-bit number Z = sum X_j 2^(w j) (X_0 least significant),
// the key K of n/2 words, a buffer Y of n words and an index i.  Each call advances i;
// when it reaches n, Y = Philox(X, K), Z = Z + 1 mod 2^(n w) and i = 0; the call
// returns Y_i.  So output number t (counting from 0 after seeding) is word t mod n of
// the block of counter Z = t / n: X_0 plays the role of Random123's counter word 0.
template <class UIntType, std::size_t w, std::size_t n, std::size_t r, UIntType... consts>
class philox_engine {
  static_assert(std::is_unsigned<UIntType>::value, "result type must be an unsigned integer");
  static_assert(n == 2 || n == 4, "only n = 2 or n = 4 is supported");
  static_assert(sizeof...(consts) == n, "n constants are needed: M0, C0[, M1, C1]");
  static_assert(r > 0, "at least one round");
  static_assert(w > 0 && w <= std::numeric_limits<UIntType>::digits && w <= 64,
                "word size must fit the result type (and 64 bits)");

  using word = detail::philox_word_t<w>;
  static constexpr word mask = detail::philox_mask<word, w>;
  static constexpr std::array<UIntType, n> all_consts{consts...};

  template <std::size_t offset>
  static constexpr std::array<UIntType, n / 2> every_other() noexcept {
    std::array<UIntType, n / 2> out{};
    for (std::size_t k = 0; k < n / 2; ++k) out[k] = all_consts[2 * k + offset];
    return out;
  }
  template <std::size_t offset>
  static constexpr std::array<word, n / 2> every_other_word() noexcept {
    std::array<word, n / 2> out{};
    for (std::size_t k = 0; k < n / 2; ++k) out[k] = static_cast<word>(all_consts[2 * k + offset] & mask);
    return out;
  }

 public:
  using result_type = UIntType;

  static constexpr std::size_t word_size = w;
  static constexpr std::size_t word_count = n;
  static constexpr std::size_t round_count = r;
  static constexpr std::array<result_type, n / 2> multipliers = every_other<0>();
  static constexpr std::array<result_type, n / 2> round_consts = every_other<1>();
  static constexpr result_type default_seed = 20111115u;

  static constexpr result_type min() noexcept { return 0; }
  static constexpr result_type max() noexcept { return static_cast<result_type>(mask); }

  philox_engine() : philox_engine(default_seed) {}
  explicit philox_engine(result_type value) { seed(value); }
  template <class Sseq, class = std::enable_if_t<!std::is_convertible<Sseq, result_type>::value &&
                                                 !std::is_same<std::remove_cv_t<Sseq>, philox_engine>::value>>
  explicit philox_engine(Sseq& q) {
    seed(q);
  }

  // K_0 = value mod 2^w, every other key word and the counter 0.
  void seed(result_type value = default_seed) {
    key_ = {};
    key_[0] = static_cast<word>(value & mask);
    counter_ = {};
    index_ = n - 1;
  }

  // p = ceil(w / 32) 32-bit values a per key word from q.generate; K_k is built from
  // a[k p] .. a[k p + p - 1], least significant first, mod 2^w.  Counter 0.
  template <class Sseq>
  std::enable_if_t<!std::is_convertible<Sseq, result_type>::value> seed(Sseq& q) {
    constexpr std::size_t p = (w + 31) / 32;
    std::array<std::uint_least32_t, n / 2 * p> a{};
    q.generate(a.begin(), a.end());
    for (std::size_t k = 0; k < n / 2; ++k) {
      std::uint64_t value = 0;
      for (std::size_t j = 0; j < p; ++j) {
        value |= static_cast<std::uint64_t>(a[k * p + j] & 0xffffffffu) << (32 * j);
      }
      key_[k] = static_cast<word>(value & mask);
    }
    counter_ = {};
    index_ = n - 1;
  }

  // C++26 set_counter: "for j = 0, ..., n-1 sets X_j to C_(n-1-j) mod 2^w" and sets i
  // to n-1 (from memory of N5014), so c is given most significant word first: c[n-1]
  // becomes X_0, Random123's counter word 0.  The next call returns word 0 of
  // Philox({c[n-1], ..., c[0]}, K).
  void set_counter(const std::array<result_type, n>& c) {
    for (std::size_t j = 0; j < n; ++j) counter_[j] = static_cast<word>(c[n - 1 - j] & mask);
    index_ = n - 1;
  }

  result_type operator()() {
    if (++index_ == n) {
      refill();
      index_ = 0;
    }
    return static_cast<result_type>(buffer_[index_]);
  }

  // As if by z calls of operator(), in constant time.
  void discard(unsigned long long z) {
    const unsigned long long buffered = n - 1 - index_;
    if (z <= buffered) {
      index_ += static_cast<std::size_t>(z);
      return;
    }
    z -= buffered;  // z >= 1 calls, starting from an empty buffer
    add_to_counter((z - 1) / n);
    refill();
    index_ = static_cast<std::size_t>((z - 1) % n);
  }

  // Y is a function of (X, K, i) (see refill), so those three are the whole state.
  friend bool operator==(const philox_engine& a, const philox_engine& b) noexcept {
    return a.counter_ == b.counter_ && a.key_ == b.key_ && a.index_ == b.index_;
  }
  friend bool operator!=(const philox_engine& a, const philox_engine& b) noexcept { return !(a == b); }

  // Text form: K_0 .. K_(n/2-1) X_0 .. X_(n-1) i, decimal, space separated (our own
  // order; the draft's exact textual layout is not reproduced from memory).
  template <class CharT, class Traits>
  friend std::basic_ostream<CharT, Traits>& operator<<(std::basic_ostream<CharT, Traits>& os,
                                                       const philox_engine& e) {
    const auto flags = os.flags(std::ios_base::dec | std::ios_base::left);
    const CharT space = os.widen(' ');
    const CharT fill = os.fill(space);
    for (word k : e.key_) os << static_cast<std::uint64_t>(k) << space;
    for (word x : e.counter_) os << static_cast<std::uint64_t>(x) << space;
    os << static_cast<std::uint64_t>(e.index_);
    os.flags(flags);
    os.fill(fill);
    return os;
  }

  // Leaves e unchanged and sets failbit if the text is not a state written by <<.
  template <class CharT, class Traits>
  friend std::basic_istream<CharT, Traits>& operator>>(std::basic_istream<CharT, Traits>& is,
                                                       philox_engine& e) {
    const auto flags = is.flags(std::ios_base::dec | std::ios_base::skipws);
    std::array<std::uint64_t, n / 2 + n + 1> v{};
    for (auto& x : v) is >> x;
    bool ok = static_cast<bool>(is) && v[n / 2 + n] < n;
    for (std::size_t j = 0; j < n / 2 + n; ++j) ok = ok && v[j] <= mask;
    if (ok) {
      for (std::size_t k = 0; k < n / 2; ++k) e.key_[k] = static_cast<word>(v[k]);
      for (std::size_t j = 0; j < n; ++j) e.counter_[j] = static_cast<word>(v[n / 2 + j]);
      e.index_ = static_cast<std::size_t>(v[n / 2 + n]);
      if (e.index_ != n - 1) {
        // Restore the invariant: Y was made from the counter before its last increment.
        e.subtract_one();
        e.refill();
      }
    } else {
      is.setstate(std::ios_base::failbit);
    }
    is.flags(flags);
    return is;
  }

 private:
  // Y = Philox(X, K); Z = Z + 1.  Invariant: if i != n-1, Y = Philox(Z - 1, K).
  void refill() {
    buffer_ = detail::philox_rounds<word, w, n, r>(counter_, key_, every_other_word<0>(),
                                                   every_other_word<1>());
    add_to_counter(1);
  }

  // Z = Z + d mod 2^(n w), d written in base 2^w.
  void add_to_counter(unsigned long long d) {
    bool carry = false;
    for (std::size_t j = 0; j < n; ++j) {
      const word digit = static_cast<word>(d & mask);
      d = w >= 64 ? 0 : (d >> (w % 64));
      const word sum = static_cast<word>(counter_[j] + digit) & mask;
      const bool overflow = sum < digit;
      const word with_carry = static_cast<word>(sum + (carry ? 1u : 0u)) & mask;
      carry = overflow || (carry && with_carry == 0);
      counter_[j] = with_carry;
      if (d == 0 && !carry) break;
    }
  }

  // Z = Z - 1 mod 2^(n w).
  void subtract_one() {
    for (std::size_t j = 0; j < n; ++j) {
      const bool borrow = counter_[j] == 0;
      counter_[j] = static_cast<word>(counter_[j] - 1u) & mask;
      if (!borrow) break;
    }
  }

  std::array<word, n> counter_{};
  std::array<word, n / 2> key_{};
  std::array<word, n> buffer_{};
  std::size_t index_ = n - 1;
};

// [rand.predef] (from memory) lists philox4x32's multipliers as 0xCD9E8D57 first: with
// 0xD2511F53 first under the same round rule as philox4x64, the 10000th output would be
// 12711806, not the draft's 1955073260 (tests/random/philox.cpp checks the latter).
using philox4x32 = philox_engine<std::uint_fast32_t, 32, 4, 10, 0xCD9E8D57, 0x9E3779B9,
                                 0xD2511F53, 0xBB67AE85>;
using philox4x64 = philox_engine<std::uint_fast64_t, 64, 4, 10, 0xCA5A826395121157,
                                 0x9E3779B97F4A7C15, 0xD2E7470EE14C6C93, 0xBB67AE8584CAA73B>;

}  // namespace kindling

#endif  // KINDLING_RANDOM_PHILOX_HPP
