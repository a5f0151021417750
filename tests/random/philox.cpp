// Tests of random/philox.hpp: the block functions against Random123 (known-answer
// vectors and the live librandom123-dev header), and kindling's counter blocks against
// their definition in DEVELOPERS.md ("Counter blocks").
#include "kindling/random/philox.hpp"

#include <doctest/doctest.h>

#include <array>
#include <cstdint>
#include <limits>
#include <random>

#include "../support/random123.hpp"

namespace {

using kindling::philox4x32_block;
using kindling::philox4x64_block;

// The block functions are usable at compile time (Random123 KAT, first row).
static_assert(philox4x32_block({0, 0, 0, 0}, {0, 0})[0] == 0x6627e8d5u, "constexpr block");

}  // namespace

TEST_CASE("philox4x32_block reproduces Random123's known-answer vectors") {
  // Random123 kat_vectors, philox4x32_10 (Salmon et al., SC'11); REFERENCES.md, verified.
  CHECK(philox4x32_block({0, 0, 0, 0}, {0, 0}) ==
        kindling::philox4x32_counter{0x6627e8d5, 0xe169c58d, 0xbc57ac4c, 0x9b00dbd8});
  CHECK(philox4x32_block({0xffffffff, 0xffffffff, 0xffffffff, 0xffffffff},
                         {0xffffffff, 0xffffffff}) ==
        kindling::philox4x32_counter{0x408f276d, 0x41c83b0e, 0xa20bc7c6, 0x6d5451fd});
  CHECK(philox4x32_block({0x243f6a88, 0x85a308d3, 0x13198a2e, 0x03707344},
                         {0xa4093822, 0x299f31d0}) ==
        kindling::philox4x32_counter{0xd16cfe09, 0x94fdcceb, 0x5001e420, 0x24126ea1});
}

TEST_CASE("philox4x64_block reproduces Random123's known-answer vectors") {
  // Random123 kat_vectors, philox4x64_10, from memory; each row agrees with the live
  // librandom123-dev header (the next test checks that header directly).
  CHECK(philox4x64_block({0, 0, 0, 0}, {0, 0}) ==
        kindling::philox4x64_counter{0x16554d9eca36314c, 0xdb20fe9d672d0fdc,
                                     0xd7e772cee186176b, 0x7e68b68aec7ba23b});
  const std::uint64_t ones = ~std::uint64_t{0};
  CHECK(philox4x64_block({ones, ones, ones, ones}, {ones, ones}) ==
        kindling::philox4x64_counter{0x87b092c3013fe90b, 0x438c3c67be8d0224,
                                     0x9cc7d7c69cd777b6, 0xa09caebf594f0ba0});
}

TEST_CASE("philox block functions agree with the live Random123 header on random inputs") {
  std::mt19937_64 bits(0x5eed);  // fully specified by the standard: same inputs everywhere
  r123::Philox4x32 r32;
  r123::Philox4x64 r64;
  for (int trial = 0; trial < 4000; ++trial) {
    kindling::philox4x32_counter c32{};
    kindling::philox4x32_key k32{};
    r123::Philox4x32::ctr_type rc32{};
    r123::Philox4x32::key_type rk32{};
    for (std::size_t j = 0; j < 4; ++j) rc32[j] = c32[j] = static_cast<std::uint32_t>(bits());
    for (std::size_t j = 0; j < 2; ++j) rk32[j] = k32[j] = static_cast<std::uint32_t>(bits());
    const auto want32 = r32(rc32, rk32);
    const auto got32 = philox4x32_block(c32, k32);

    kindling::philox4x64_counter c64{};
    kindling::philox4x64_key k64{};
    r123::Philox4x64::ctr_type rc64{};
    r123::Philox4x64::key_type rk64{};
    for (std::size_t j = 0; j < 4; ++j) rc64[j] = c64[j] = bits();
    for (std::size_t j = 0; j < 2; ++j) rk64[j] = k64[j] = bits();
    const auto want64 = r64(rc64, rk64);
    const auto got64 = philox4x64_block(c64, k64);

    bool same = true;
    for (std::size_t j = 0; j < 4; ++j) same = same && got32[j] == want32[j] && got64[j] == want64[j];
    REQUIRE_MESSAGE(same, "trial " << trial << ": every word equals Random123's philox4x32/4x64");
  }
}

TEST_CASE("counter_of lays out (block mod 2^32, block >> 32, domain, format_version)") {
  // DEVELOPERS.md "Counter blocks": format version 1 is frozen with the digests.
  CHECK(kindling::format_version == 1u);
  const kindling::philox4x32_counter c = kindling::counter_of(3, 0x123456789ull);
  CHECK(c == kindling::philox4x32_counter{0x23456789u, 0x1u, 3u, kindling::format_version});
  // The block of that counter is Random123's philox4x32 of the same words (librandom123-dev).
  const kindling::philox4x32_key key{0xa4093822u, 0x299f31d0u};
  const r123::Philox4x32::ctr_type rc = {{0x23456789u, 0x1u, 3u, 1u}};
  const r123::Philox4x32::key_type rk = {{key[0], key[1]}};
  const r123::Philox4x32::ctr_type x = r123::Philox4x32()(rc, rk);
  const kindling::philox4x32_counter w = philox4x32_block(c, key);
  for (unsigned j = 0; j < 4; ++j) CHECK(w[j] == x.v[j]);
}
