// philox_engine: a C++26-style engine (std::philox_engine's interface) over the Philox
// rounds of random/philox.hpp, with the predefined philox4x32 and philox4x64. kindling's
// own values do not go through it (they use the pure block functions); it is here for
// users who want a standard-library engine with Philox's bits.
#ifndef KINDLING_RANDOM_PHILOX_ENGINE_HPP
#define KINDLING_RANDOM_PHILOX_ENGINE_HPP

#include <array>
#include <cstddef>
#include <cstdint>
#include <iosfwd>  // the stream operators are templates: <ios> comes with the user's streams
#include <limits>
#include <type_traits>

#include "kindling/random/philox.hpp"

namespace kindling {

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
    using ios = std::basic_ostream<CharT, Traits>;  // dependent, so <iosfwd> suffices here
    const auto flags = os.flags(ios::dec | ios::left);
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
    using ios = std::basic_istream<CharT, Traits>;
    const auto flags = is.flags(ios::dec | ios::skipws);
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
      is.setstate(ios::failbit);
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
using philox4x32 = philox_engine<std::uint_fast32_t, 32, 4, philox_rounds_count,
                                 philox4x32_multipliers[0], philox4x32_key_increments[0],
                                 philox4x32_multipliers[1], philox4x32_key_increments[1]>;
using philox4x64 = philox_engine<std::uint_fast64_t, 64, 4, philox_rounds_count,
                                 philox4x64_multipliers[0], philox4x64_key_increments[0],
                                 philox4x64_multipliers[1], philox4x64_key_increments[1]>;

}  // namespace kindling

#endif  // KINDLING_RANDOM_PHILOX_ENGINE_HPP
