// tests/battery/philox_words.cpp: writes the raw 32-bit words of one kindling stream
// to stdout, for statistical batteries that read raw binary input (dieharder -g 200).
//
// The words are those the library draws from: blocks 0, 1, 2, ... of the values
// domain of make_stream(seed, name), i.e. Philox4x32-10 over the counters
// (b mod 2^32, b >> 32, domain, format_version) under the stream's key
// (DEVELOPERS.md, "Counter blocks"), each block's words w0..w3 in order, each word in
// the machine's byte order (little-endian here), which is what dieharder's raw input
// reads as one 32-bit unsigned integer.
//
//   philox_words [seed [name [domain]]]     (defaults: 20261202 "battery.weight" 0)
//
// Runs until stdout is closed (dieharder closes it when the battery ends).
#include <cerrno>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include <kindling/random/stream.hpp>

int main(int argc, char** argv) {
  const std::uint64_t seed = argc > 1 ? std::strtoull(argv[1], nullptr, 0) : 20261202u;
  const std::string name = argc > 2 ? argv[2] : "battery.weight";
  const auto dom = static_cast<std::uint32_t>(argc > 3 ? std::strtoul(argv[3], nullptr, 0) : 0u);
  const kindling::stream s = kindling::stream::root(seed).named(name);
  std::vector<std::uint32_t> buffer(1u << 16);  // 256 KiB a write
  std::uint64_t block = 0;
  for (;;) {
    for (std::size_t i = 0; i < buffer.size(); i += 4) {
      const auto w = s.block(dom, block++);
      for (std::size_t j = 0; j < 4; ++j) buffer[i + j] = w[j];
    }
    if (std::fwrite(buffer.data(), sizeof(std::uint32_t), buffer.size(), stdout) != buffer.size()) {
      return 0;  // the reader closed the pipe: the battery is done
    }
  }
}
