// Streams: seed + parameter name -> Philox key; child streams; counter blocks.
//
// Reproducibility format version 1 (DEVELOPERS.md, "Streams" and "Counter blocks").
// Enough to re-implement in another language:
//
//   SipHash(K, bytes) is SipHash-2-4 with the 16 key bytes k0 LE || k1 LE (siphash.hpp).
//
//   A stream is a SipHash key K = (k0, k1) of two 64-bit words.
//   root(s):         K = (s, 0x6b696e646c696e67)     ("kindling" in ASCII, read big-endian)
//   named(L):        k0' = SipHash(K, 01 6e L),  k1' = SipHash(K, 02 6e L)
//                    L = the label's bytes as given (UTF-8 for text), no terminator
//   indexed(n):      k0' = SipHash(K, 01 69 N),  k1' = SipHash(K, 02 69 N)
//                    N = the 8 little-endian bytes of the 64-bit n
//   philox key:      h = SipHash(K, 03) (one byte);  key = (h mod 2^32, h >> 32)
//   block(d, b):     Philox4x32-10(counter_of(d, b), key): counter (b mod 2^32, b >> 32,
//                    d, format_version), words in Random123 order (philox.hpp)
//
// The stream of parameter `name` under seed s is root(s).named(name) (make_stream).
// A stream depends only on its own path from the root, so adding or renaming another
// parameter never moves its values.  Tag bytes 0x6e ('n') and 0x69 ('i') keep text
// and integer children apart even when their bytes coincide.
#ifndef KINDLING_RANDOM_STREAM_HPP
#define KINDLING_RANDOM_STREAM_HPP

#include <array>
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "kindling/random/philox.hpp"
#include "kindling/random/siphash.hpp"

namespace kindling {

// Counter word 2 of a block: sub-streams inside one scheme.  Schemes may use higher
// values and document them.
namespace domain {
inline constexpr std::uint32_t values = 0;
inline constexpr std::uint32_t positions = 1;
inline constexpr std::uint32_t signs = 2;
inline constexpr std::uint32_t gaussian = 3;  // auxiliary Gaussian matrix
}  // namespace domain

class stream {
 public:
  static stream root(std::uint64_t seed) noexcept { return stream(seed, 0x6b696e646c696e67u); }

  stream named(std::string_view label) const noexcept {
    return child(0x6e, label.data(), label.size());
  }

  stream indexed(std::uint64_t index) const noexcept {
    unsigned char bytes[8];
    for (int j = 0; j < 8; ++j) bytes[j] = static_cast<unsigned char>(index >> (8 * j));
    return child(0x69, bytes, sizeof bytes);
  }

  std::array<std::uint64_t, 2> sip_key() const noexcept { return {k0_, k1_}; }

  philox4x32_key philox_key() const noexcept { return philox_key_; }

  philox4x32_counter block(std::uint32_t domain, std::uint64_t block_index) const noexcept {
    return philox4x32_block(counter_of(domain, block_index), philox_key_);
  }

  // The Philox key is a function of (k0, k1), so the SipHash key is the whole identity.
  friend bool operator==(const stream& a, const stream& b) noexcept {
    return a.k0_ == b.k0_ && a.k1_ == b.k1_;
  }
  friend bool operator!=(const stream& a, const stream& b) noexcept { return !(a == b); }

 private:
  stream(std::uint64_t k0, std::uint64_t k1) noexcept : k0_(k0), k1_(k1) {
    const unsigned char key_tag = 0x03;
    const std::uint64_t h = siphash24(k0, k1, &key_tag, 1);
    philox_key_ = {static_cast<std::uint32_t>(h), static_cast<std::uint32_t>(h >> 32)};
  }

  // k_j' = SipHash(K, j || tag || label) for j = 1, 2.
  stream child(unsigned char tag, const void* label, std::size_t size) const noexcept {
    std::uint64_t k[2];
    for (unsigned char j = 1; j <= 2; ++j) {
      const unsigned char prefix[2] = {j, tag};
      detail::siphash24_state state(k0_, k1_);
      state.update(prefix, sizeof prefix);
      state.update(label, size);
      k[j - 1] = state.finish();
    }
    return stream(k[0], k[1]);
  }

  std::uint64_t k0_;
  std::uint64_t k1_;
  philox4x32_key philox_key_{};
};

// The stream of parameter `name` under `seed`.
inline stream make_stream(std::uint64_t seed, std::string_view name) noexcept {
  return stream::root(seed).named(name);
}

}  // namespace kindling

#endif  // KINDLING_RANDOM_STREAM_HPP
