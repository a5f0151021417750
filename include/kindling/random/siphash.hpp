// SipHash-2-4, the keyed hash that turns seeds and parameter names into keys.
//
// Aumasson & Bernstein, "SipHash: a fast short-input PRF" (INDOCRYPT 2012): 128-bit
// key, 64-bit output, 2 compression rounds per 8-byte message word and 4 finalization
// rounds.  The key bytes are k0 little-endian followed by k1 little-endian, which is
// how the paper's reference code reads its 16-byte key, so siphash24(k0, k1, ...) equals
// the reference implementation on key = k0 LE || k1 LE.
#ifndef KINDLING_RANDOM_SIPHASH_HPP
#define KINDLING_RANDOM_SIPHASH_HPP

#include <cstddef>
#include <cstdint>

namespace kindling {
namespace detail {

// Incremental SipHash-2-4: update() any number of times, then finish() once.  Lets
// callers hash a prefix and a label without building a joined buffer.
class siphash24_state {
 public:
  siphash24_state(std::uint64_t k0, std::uint64_t k1) noexcept
      : v0_(k0 ^ 0x736f6d6570736575u),  // "somepseudorandomlygeneratedbytes", paper §2
        v1_(k1 ^ 0x646f72616e646f6du),
        v2_(k0 ^ 0x6c7967656e657261u),
        v3_(k1 ^ 0x7465646279746573u) {}

  void update(const void* data, std::size_t size) noexcept {
    const unsigned char* bytes = static_cast<const unsigned char*>(data);
    for (std::size_t j = 0; j < size; ++j) {
      // Message words are read little-endian, whatever the host byte order.
      pending_ |= static_cast<std::uint64_t>(bytes[j]) << (8 * (length_ % 8));
      ++length_;
      if (length_ % 8 == 0) {
        compress(pending_);
        pending_ = 0;
      }
    }
  }

  std::uint64_t finish() noexcept {
    // Last word: the remaining bytes, with the length mod 256 in the top byte.
    compress(pending_ | (static_cast<std::uint64_t>(length_ & 0xffu) << 56));
    v2_ ^= 0xffu;
    for (int j = 0; j < 4; ++j) round();
    return v0_ ^ v1_ ^ v2_ ^ v3_;
  }

 private:
  static std::uint64_t rotl(std::uint64_t x, int b) noexcept {
    return (x << b) | (x >> (64 - b));
  }

  void round() noexcept {  // SipRound, paper §2
    v0_ += v1_; v1_ = rotl(v1_, 13); v1_ ^= v0_; v0_ = rotl(v0_, 32);
    v2_ += v3_; v3_ = rotl(v3_, 16); v3_ ^= v2_;
    v0_ += v3_; v3_ = rotl(v3_, 21); v3_ ^= v0_;
    v2_ += v1_; v1_ = rotl(v1_, 17); v1_ ^= v2_; v2_ = rotl(v2_, 32);
  }

  void compress(std::uint64_t m) noexcept {
    v3_ ^= m;
    round();
    round();
    v0_ ^= m;
  }

  std::uint64_t v0_, v1_, v2_, v3_;
  std::uint64_t pending_ = 0;
  std::uint64_t length_ = 0;
};

}  // namespace detail

// SipHash-2-4 of size bytes at data under the key (k0, k1).
inline std::uint64_t siphash24(std::uint64_t k0, std::uint64_t k1, const void* data,
                               std::size_t size) noexcept {
  detail::siphash24_state state(k0, k1);
  state.update(data, size);
  return state.finish();
}

}  // namespace kindling

#endif  // KINDLING_RANDOM_SIPHASH_HPP
