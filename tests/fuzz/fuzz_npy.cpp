// tests/fuzz/fuzz_npy.cpp: libFuzzer target for the .npy reader (io/npy.hpp).
//
// Any input is either refused with std::invalid_argument or std::length_error (the
// header's contract; any other exception escapes and is a finding), or parsed into an
// array whose bytes are exactly size() elements; such an array must then encode and
// parse back to the same shape, type and bytes.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <stdexcept>
#include <string>

#include <kindling/io/npy.hpp>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string file(reinterpret_cast<const char*>(data), size);
  kindling::npy_array a;
  try {
    a = kindling::parse_npy(file, "fuzz input");
  } catch (const std::invalid_argument&) {
    return 0;
  } catch (const std::length_error&) {
    return 0;
  }
  if (a.bytes.size() != a.size() * kindling::npy_type_size(a.type)) std::abort();
  if (a.size() <= (1u << 16)) (void)a.values();  // every element readable
  const kindling::npy_array b = kindling::parse_npy(kindling::encode_npy(a), "re-encoded fuzz input");
  if (b.shape != a.shape || b.type != a.type || b.bytes != a.bytes) std::abort();
  return 0;
}
