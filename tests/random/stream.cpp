// Tests of random/stream.hpp: the key derivation of DEVELOPERS.md (format version 1),
// re-derived here from the documented bytes with siphash24 and philox4x32_block.
#include "kindling/random/stream.hpp"

#include <doctest/doctest.h>

#include <array>
#include <cstdint>
#include <string>
#include <vector>

namespace {

// SipHash-2-4 under key k of the given bytes.
std::uint64_t sip(const std::array<std::uint64_t, 2>& k, const std::string& bytes) {
  return kindling::siphash24(k[0], k[1], bytes.data(), bytes.size());
}

// The message j || tag || label of a child's key word j.
std::string with_prefix(char j, char tag, const std::string& label) {
  return std::string{j, tag} + label;
}

}  // namespace

TEST_CASE("stream derivation follows the documented bytes") {
  // DEVELOPERS.md "Streams": root key, text child (tag 0x6e), integer child (tag 0x69),
  // Philox key from SipHash(K, 0x03).
  const std::uint64_t seed = 0x0123456789abcdefu;
  const kindling::stream root = kindling::stream::root(seed);
  const std::array<std::uint64_t, 2> k_root{seed, 0x6b696e646c696e67u};
  CHECK(root.sip_key() == k_root);
  CHECK(std::string("kindling") == std::string{'\x6b', '\x69', '\x6e', '\x64', '\x6c', '\x69', '\x6e', '\x67'});

  const std::string name = "pump.encoder.dense1.weight";
  const std::array<std::uint64_t, 2> k_named{sip(k_root, with_prefix('\x01', '\x6e', name)),
                                             sip(k_root, with_prefix('\x02', '\x6e', name))};
  const kindling::stream named = root.named(name);
  CHECK(named.sip_key() == k_named);

  const std::uint64_t h = sip(k_named, std::string(1, '\x03'));
  CHECK(named.philox_key() == kindling::philox4x32_key{static_cast<std::uint32_t>(h),
                                                       static_cast<std::uint32_t>(h >> 32)});

  const std::uint64_t index = 0x1122334455667788u;
  const std::string le{'\x88', '\x77', '\x66', '\x55', '\x44', '\x33', '\x22', '\x11'};
  const std::array<std::uint64_t, 2> k_indexed{sip(k_named, with_prefix('\x01', '\x69', le)),
                                               sip(k_named, with_prefix('\x02', '\x69', le))};
  CHECK(named.indexed(index).sip_key() == k_indexed);
}

TEST_CASE("stream blocks put the block index, domain and format version in the documented words") {
  // DEVELOPERS.md "Counter blocks": counter (b mod 2^32, b >> 32, d, format_version).
  const kindling::stream s = kindling::make_stream(7, "pump.encoder.dense1.bias");
  const std::uint64_t b = 0x00000005deadbeefu;
  CHECK(kindling::format_version == 1u);
  CHECK(s.block(kindling::domain::signs, b) ==
        kindling::philox4x32_block({0xdeadbeefu, 5u, 2u, 1u}, s.philox_key()));
  CHECK(s.block(kindling::domain::values, 0) ==
        kindling::philox4x32_block({0, 0, 0, 1}, s.philox_key()));
  CHECK(kindling::domain::values == 0u);
  CHECK(kindling::domain::positions == 1u);
  CHECK(kindling::domain::gaussian == 3u);
  CHECK(s.block(kindling::domain::values, 3) != s.block(kindling::domain::positions, 3));
}

TEST_CASE("stream derivation is deterministic and separates labels") {
  const kindling::stream root = kindling::stream::root(2024);
  CHECK(root.named("a") == kindling::stream::root(2024).named("a"));
  CHECK(root.named("a") != root.named("b"));
  CHECK(root.named("a") != kindling::stream::root(2025).named("a"));
  CHECK(root.named("a").named("b") != root.named("ab"));
  CHECK(root.indexed(0) != root.indexed(1));
  SUBCASE("tag bytes keep integer and text children apart") {
    CHECK(root.indexed(0) != root.named(""));
    CHECK(root.indexed(0) != root.named(std::string(8, '\0')));  // the same 8 label bytes
  }
}

TEST_CASE("make_stream is the text child of the seed's root") {
  CHECK(kindling::make_stream(99, "x") == kindling::stream::root(99).named("x"));
  CHECK(kindling::make_stream(99, "x").philox_key() == kindling::stream::root(99).named("x").philox_key());
}

TEST_CASE("a parameter's blocks do not depend on which other streams were made") {
  const auto alone = kindling::make_stream(11, "dense1.weight").block(kindling::domain::values, 41);
  std::vector<kindling::stream> others;
  for (int j = 0; j < 50; ++j) others.push_back(kindling::make_stream(11, "layer" + std::to_string(j)));
  others.push_back(kindling::make_stream(11, "dense0.weight"));
  const auto among_others = kindling::make_stream(11, "dense1.weight").block(kindling::domain::values, 41);
  CHECK(alone == among_others);
  CHECK(others.back().block(kindling::domain::values, 41) != alone);
}
