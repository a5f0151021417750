// Tests of kindling/io/safetensors.hpp. The layout checked here is the safetensors
// format as we remember its public specification (8-byte little-endian header length,
// JSON header of dtype / shape / data_offsets, raw little-endian data); that NumPy reads
// our files with json + np.frombuffer, and we read a file NumPy's side wrote, is checked
// live by tests/tool/safetensors_numpy.py.
#include <doctest/doctest.h>

#include <cstdint>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <stdexcept>
#include <string>
#include <vector>

#include <unistd.h>

#include "kindling/io/safetensors.hpp"

using namespace kindling;

namespace {

const std::string dir = "safetensors_test_files";

// A file from a header text and `data_size` bytes of data (value 7).
std::string file_of(const std::string& header, std::size_t data_size, std::uint64_t claimed = ~std::uint64_t{0}) {
  const std::uint64_t n = claimed == ~std::uint64_t{0} ? header.size() : claimed;
  std::string out;
  for (int k = 0; k < 8; ++k) out += static_cast<char>((n >> (8 * k)) & 0xff);
  return out + header + std::string(data_size, '\7');
}

std::string message_of(const std::string& bytes) {
  const std::string path = "st_bad.safetensors";
  std::ofstream(path, std::ios::binary) << bytes;
  try {
    safetensors_reader r(path);
  } catch (const std::invalid_argument& e) {
    std::remove(path.c_str());
    return e.what();
  }
  std::remove(path.c_str());
  return "";
}

bool has(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

}  // namespace

TEST_CASE("safetensors: written tensors read back, byte for byte, in the format's layout") {
  const std::string path = "st_round.safetensors";
  std::vector<float> a{1.5f, -2.0f, 3.25f, 0.0f, 1e-3f, 7.0f};
  std::vector<double> b(300000);  // more than one writer chunk (1 MiB)
  for (std::size_t i = 0; i < b.size(); ++i) b[i] = static_cast<double>(i) * 0.5;
  std::vector<safetensors_source> src(2);
  src[0] = {"head.weight", tensor_dtype::f32, {2, 3},
            [&](std::uint64_t off, char* buf, std::size_t n) { std::memcpy(buf, reinterpret_cast<char*>(a.data()) + off, n); }};
  src[1] = {"gru.w_ih", tensor_dtype::f64, {300000},
            [&](std::uint64_t off, char* buf, std::size_t n) { std::memcpy(buf, reinterpret_cast<char*>(b.data()) + off, n); }};
  write_safetensors(path, src, {{"note", "conveyor belt"}});
  safetensors_reader r(path);
  REQUIRE(r.index().tensors.size() == 2);
  CHECK(r.index().metadata.at("note") == "conveyor belt");
  CHECK(r.index().data_start % 8 == 0);
  const safetensors_entry* e = r.index().find("head.weight");
  REQUIRE(e != nullptr);
  CHECK(e->shape == std::vector<std::uint64_t>{2, 3});
  CHECK(e->begin == 0);
  CHECK(e->end == 24);
  std::vector<float> a2(6);
  r.read(*e, 0, reinterpret_cast<char*>(a2.data()), 24);
  CHECK(a2 == a);
  const safetensors_entry* f = r.index().find("gru.w_ih");
  REQUIRE(f != nullptr);
  std::vector<double> b2(b.size());
  r.read(*f, 0, reinterpret_cast<char*>(b2.data()), b2.size() * 8);
  CHECK(b2 == b);
  // The first 8 bytes are the header length, little-endian; then the header is JSON.
  std::ifstream in(path, std::ios::binary);
  unsigned char len[8];
  in.read(reinterpret_cast<char*>(len), 8);
  std::uint64_t n = 0;
  for (int k = 7; k >= 0; --k) n = (n << 8) | len[k];
  CHECK(n + 8 == r.index().data_start);
  std::remove(path.c_str());
}

TEST_CASE("safetensors: a tensor mapped in place holds the bytes read() gives, and a shrunk file is not mapped") {
  const std::string path = "st_map.safetensors";
  std::vector<double> b(300000);  // spans many pages, starting inside the header's page
  for (std::size_t i = 0; i < b.size(); ++i) b[i] = static_cast<double>(i) * 0.25 - 7;
  std::vector<safetensors_source> src(2);
  src[0] = {"belt.bias", tensor_dtype::f32, {3}, [](std::uint64_t, char* buf, std::size_t n) { std::memset(buf, 1, n); }};
  src[1] = {"belt.weight", tensor_dtype::f64, {300000},
            [&](std::uint64_t off, char* buf, std::size_t n) { std::memcpy(buf, reinterpret_cast<char*>(b.data()) + off, n); }};
  write_safetensors(path, src);
  {
    safetensors_reader r(path);
    const safetensors_entry& w = *r.index().find("belt.weight");
    const mapped_range m = r.map(w);
    REQUIRE(static_cast<bool>(m));
    std::vector<char> read(w.end - w.begin);
    r.read(w, 0, read.data(), read.size());
    CHECK(std::memcmp(m.data(), read.data(), read.size()) == 0);
    // Shrunk by another process after opening: not mapped (a mapping would fault on the
    // lost pages), and read() says the file shrank.
    REQUIRE(::truncate(path.c_str(), static_cast<off_t>(r.index().data_start + w.begin + 8)) == 0);
    CHECK_FALSE(static_cast<bool>(r.map(w)));
    CHECK_THROWS_WITH_AS(r.read(w, 0, read.data(), read.size()), doctest::Contains("file shrank?"), std::invalid_argument);
    CHECK(std::memcmp(m.data(), read.data(), 8) == 0);  // the first page of the old mapping is still there
  }
  std::remove(path.c_str());
}

TEST_CASE("safetensors: a failed write leaves the old file in place") {
  const std::string path = "st_keep.safetensors";
  std::ofstream(path) << "old";
  std::vector<safetensors_source> src(2);
  src[0] = {"x", tensor_dtype::f32, {1}, [](std::uint64_t, char* b, std::size_t n) { std::memset(b, 0, n); }};
  src[1] = {"x", tensor_dtype::f32, {1}, [](std::uint64_t, char* b, std::size_t n) { std::memset(b, 0, n); }};
  CHECK_THROWS_WITH_AS(write_safetensors(path, src), doctest::Contains("tensor 'x' is given twice"), std::invalid_argument);
  src[1].name = "y";
  src[1].fill = [](std::uint64_t, char*, std::size_t) { throw std::runtime_error("the source failed"); };
  CHECK_THROWS_WITH_AS(write_safetensors(path, src), "the source failed", std::runtime_error);
  std::ifstream in(path);
  std::string text;
  in >> text;
  CHECK(text == "old");
  std::remove(path.c_str());
}

TEST_CASE("safetensors: every malformed header is refused, naming the tensor or key, the value and what was expected") {
  const std::string ok = R"({"w":{"dtype":"F32","shape":[2],"data_offsets":[0,8]}})";
  CHECK(message_of(file_of(ok, 8)) == "");
  CHECK(has(message_of(file_of(ok, 8, 5000)), "header length 5000 runs past the end of the file"));
  CHECK(has(message_of(file_of("{}", 0, 200000000)), "header length 200000000 bytes, expected at most 100000000"));
  CHECK(has(message_of("abc"), "holds 3 bytes, expected at least 8"));
  CHECK(has(message_of(file_of("[1, 2]", 0)), "the header is [1,2], expected a JSON object"));
  CHECK(has(message_of(file_of("{\"w\":", 0)), "not valid JSON"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"I8","shape":[2],"data_offsets":[0,2]}})", 2)),
            "tensor 'w': dtype = \"I8\", expected one of F16, BF16, F32, F64"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"F32","shape":[3],"data_offsets":[0,8]}})", 8)),
            "tensor 'w': shape [3] of F32 does not fill its data_offsets [0, 8] (8 bytes)"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"F32","shape":[2],"data_offsets":[0,16]}})", 8)),
            "tensor 'w': data_offsets [0, 16] runs past the data section's 8 bytes"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"F32","shape":[2],"data_offsets":[8,0]}})", 8)), "expected begin <= end"));
  CHECK(has(message_of(file_of(R"({"a":{"dtype":"F32","shape":[2],"data_offsets":[0,8]},)"
                               R"("b":{"dtype":"F32","shape":[2],"data_offsets":[4,12]}})", 12)),
            "tensor 'b': data_offsets begin 4 overlaps tensor 'a'"));
  CHECK(has(message_of(file_of(R"({"a":{"dtype":"F32","shape":[1],"data_offsets":[0,4]},)"
                               R"("b":{"dtype":"F32","shape":[1],"data_offsets":[8,12]}})", 12)),
            "tensor 'b': data_offsets begin 8 leaves a gap after tensor 'a'"));
  CHECK(has(message_of(file_of(ok, 12)), "the tensors end at byte 8 of the data section, but it holds 12 bytes"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"F32","shape":[1],"data_offsets":[0,4]},)"
                               R"("w":{"dtype":"F32","shape":[1],"data_offsets":[4,8]}})", 8)),
            "tensor 'w' appears twice in the header"));
  CHECK(has(message_of(file_of(R"({"__metadata__":{"a":1},"w":{"dtype":"F32","shape":[2],"data_offsets":[0,8]}})", 8)),
            "'__metadata__.a' = 1, expected a string"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"F32","shape":[-2],"data_offsets":[0,8]}})", 8)),
            "'w.shape[0]' = -2, expected a whole number >= 0"));
  CHECK(has(message_of(file_of(R"({"w":{"dtype":"F32","shape":[2]}})", 8)), "tensor 'w' has no key 'data_offsets'"));
}
