// Tests of random/philox_engine.hpp: the C++26-style engines against the [rand.predef]
// check values (ISO C++26 draft N5014 29.5.6, verified with librandom123-dev) and
// against Random123's philox4x32 / philox4x64 words.
#include "kindling/random/philox_engine.hpp"

#include <doctest/doctest.h>

#include <array>
#include <cstdint>
#include <limits>
#include <random>
#include <sstream>
#include <type_traits>

#include "../support/random123.hpp"

namespace {

using kindling::philox4x32_block;
using kindling::philox4x64_block;

// Engines of the n = 2 members of the family, with Random123's 2x constants
// (PHILOX_M2x32_0, PHILOX_M2x64_0, PHILOX_W*_0 in Random123/philox.h).
using philox2x32 = kindling::philox_engine<std::uint32_t, 32, 2, 10, 0xd256d193u, 0x9E3779B9u>;
using philox2x64 = kindling::philox_engine<std::uint64_t, 64, 2, 10, 0xD2B74407B1CE6E93u,
                                           0x9E3779B97F4A7C15u>;

// C++17 has no concepts: the UniformRandomBitGenerator requirements spelled out.
template <class G>
constexpr bool is_uniform_random_bit_generator =
    std::is_unsigned<typename G::result_type>::value &&
    std::is_same<decltype(std::declval<G&>()()), typename G::result_type>::value &&
    std::is_same<decltype(G::min()), typename G::result_type>::value &&
    std::is_same<decltype(G::max()), typename G::result_type>::value && (G::min() < G::max());
static_assert(is_uniform_random_bit_generator<kindling::philox4x32>, "philox4x32 is a URBG");
static_assert(is_uniform_random_bit_generator<kindling::philox4x64>, "philox4x64 is a URBG");
static_assert(is_uniform_random_bit_generator<philox2x32>, "philox2x32 is a URBG");

}  // namespace

TEST_CASE("philox engines give the C++26 check values for their 10000th output") {
  // ISO C++26 draft [rand.predef] (N5014 29.5.6); REFERENCES.md, verified with
  // librandom123-dev as word 3 of the block of counter 2499 under key 20111115.
  SUBCASE("philox4x32") {
    kindling::philox4x32 e;
    e.discard(9999);
    CHECK(e() == 1955073260u);
    CHECK(philox4x32_block({2499, 0, 0, 0}, {20111115, 0})[3] == 1955073260u);
  }
  SUBCASE("philox4x64") {
    kindling::philox4x64 e;
    for (int j = 0; j < 9999; ++j) e();
    CHECK(e() == 3409172418970261260u);
    CHECK(philox4x64_block({2499, 0, 0, 0}, {20111115, 0})[3] == 3409172418970261260u);
  }
}

TEST_CASE("philox engines deliver the words of consecutive counters, as Random123 computes them") {
  r123::Philox2x32 r2x32;
  r123::Philox2x64 r2x64;
  philox2x32 e32(77);
  philox2x64 e64(77);
  for (std::uint32_t z = 0; z < 300; ++z) {
    const auto w32 = r2x32({{z, 0}}, {{77}});
    const auto w64 = r2x64({{z, 0}}, {{77}});
    for (std::size_t j = 0; j < 2; ++j) {
      REQUIRE_MESSAGE(e32() == w32[j], "philox2x32 output " << 2 * z + j);
      REQUIRE_MESSAGE(e64() == w64[j], "philox2x64 output " << 2 * z + j);
    }
  }
  kindling::philox4x64 e4x64(5);
  for (std::uint64_t z = 0; z < 300; ++z) {
    const auto w = philox4x64_block({z, 0, 0, 0}, {5, 0});
    for (std::size_t j = 0; j < 4; ++j) REQUIRE(e4x64() == w[j]);
  }
}

TEST_CASE("philox engine discard(z) equals z calls") {
  for (unsigned long long start : {0ull, 1ull, 3ull, 4ull, 6ull}) {
    for (unsigned long long z : {0ull, 1ull, 2ull, 3ull, 4ull, 5ull, 7ull, 8ull, 9ull, 1001ull}) {
      kindling::philox4x32 a, b;
      a.discard(start);
      for (unsigned long long j = 0; j < start; ++j) b();
      a.discard(z);
      for (unsigned long long j = 0; j < z; ++j) b();
      CHECK_MESSAGE(a == b, "same state after start " << start << " and z " << z);
      CHECK(a() == b());
    }
  }
  SUBCASE("a long jump lands on the counter (z / 4) split into 32-bit words") {
    kindling::philox4x32 e(9);
    e.discard(4ull << 38);  // counter 2^38 = words (0, 64, 0, 0)
    CHECK(e() == philox4x32_block({0, 64, 0, 0}, {9, 0})[0]);
  }
}

TEST_CASE("philox engine set_counter takes the most significant word first") {
  // C++26 set_counter (from memory of N5014): X_j = C_(n-1-j), next call starts a block.
  kindling::philox4x32 e(3);
  e();
  e.set_counter({10, 20, 30, 40});
  const auto w = philox4x32_block({40, 30, 20, 10}, {3, 0});
  for (std::size_t j = 0; j < 4; ++j) CHECK_MESSAGE(e() == w[j], "word " << j << " of counter (40,30,20,10)");

  SUBCASE("the counter carries from word 0 into word 1") {
    e.set_counter({0, 0, 0, 0xffffffff});
    e.discard(4);
    CHECK(e() == philox4x32_block({0, 1, 0, 0}, {3, 0})[0]);
  }
  SUBCASE("the counter wraps to zero after its largest value") {
    kindling::philox4x64 f(3);
    const std::uint64_t ones = ~std::uint64_t{0};
    f.set_counter({ones, ones, ones, ones});
    f.discard(4);
    CHECK(f() == philox4x64_block({0, 0, 0, 0}, {3, 0})[0]);
  }
  SUBCASE("word values are taken mod 2^w") {
    if constexpr (std::numeric_limits<kindling::philox4x32::result_type>::digits > 32) {
      kindling::philox4x32 g(3);
      g.set_counter({0, 0, 0, (std::uint_fast32_t{1} << 32) + 40});
      CHECK(g() == philox4x32_block({40, 0, 0, 0}, {3, 0})[0]);
    }
  }
}

TEST_CASE("philox engine seeding sets the key and restarts the counter") {
  SUBCASE("seed(value) is key (value mod 2^w, 0) at counter 0") {
    kindling::philox4x32 e;
    e();
    e.seed(12345);
    CHECK(e == kindling::philox4x32(12345));
    CHECK(e() == philox4x32_block({0, 0, 0, 0}, {12345, 0})[0]);
    CHECK(kindling::philox4x32() == kindling::philox4x32(kindling::philox4x32::default_seed));
    CHECK(kindling::philox4x32::default_seed == 20111115u);
    if constexpr (std::numeric_limits<kindling::philox4x32::result_type>::digits > 32) {
      CHECK(kindling::philox4x32((std::uint_fast32_t{1} << 32) + 7) == kindling::philox4x32(7));
    }
  }
  SUBCASE("seed(seq) builds key words from ceil(w/32) generated values, low first") {
    // seed_seq's output depends on how many values are asked for: 2 for 4x32, 4 for 4x64.
    std::seed_seq seq{1, 2, 3};
    std::array<std::uint32_t, 2> a2{};
    seq.generate(a2.begin(), a2.end());
    std::array<std::uint32_t, 4> a{};
    seq.generate(a.begin(), a.end());

    kindling::philox4x32 e32(seq);
    CHECK(e32() == philox4x32_block({0, 0, 0, 0}, {a2[0], a2[1]})[0]);
    kindling::philox4x64 e64;
    e64.seed(seq);
    const kindling::philox4x64_key k64{a[0] | (std::uint64_t{a[1]} << 32),
                                       a[2] | (std::uint64_t{a[3]} << 32)};
    CHECK(e64() == philox4x64_block({0, 0, 0, 0}, k64)[0]);
    CHECK(kindling::philox4x64(seq) != kindling::philox4x64());
  }
}

TEST_CASE("philox engine equality follows the state") {
  kindling::philox4x64 a, b;
  CHECK(a == b);
  a();
  CHECK(a != b);
  b();
  CHECK(a == b);
  CHECK(kindling::philox4x64(1) != kindling::philox4x64(2));
}

TEST_CASE("philox engine range is the full w-bit word") {
  CHECK(kindling::philox4x32::min() == 0u);
  CHECK(kindling::philox4x32::max() == 0xffffffffu);
  CHECK(kindling::philox4x64::max() == ~std::uint64_t{0});
  CHECK(kindling::philox4x32::word_size == 32);
  CHECK(kindling::philox4x32::word_count == 4);
  CHECK(kindling::philox4x32::round_count == 10);
  CHECK(kindling::philox4x32::multipliers[1] == 0xD2511F53u);
  CHECK(kindling::philox4x64::round_consts[1] == 0xBB67AE8584CAA73Bu);
}

TEST_CASE("philox engine state survives a text round trip") {
  kindling::philox4x32 e(42);
  e.discard(4 * 1000 + 2);  // mid-block, so the buffered words must be restored
  std::stringstream text;
  text << e;
  kindling::philox4x32 f;
  text >> f;
  CHECK(f == e);
  for (int j = 0; j < 6; ++j) CHECK(f() == e());

  SUBCASE("malformed text sets failbit and leaves the engine unchanged") {
    std::istringstream bad("1 2 3 4 5 6 9");  // index 9 >= n
    kindling::philox4x32 g(5);
    bad >> g;
    CHECK(bad.fail());
    CHECK(g == kindling::philox4x32(5));
  }
}
