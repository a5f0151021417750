// Tests of kindling/io/npy.hpp. The format is NumPy's documented .npy format
// (numpy/lib/format.py, "NEP 1 — A simple file format for NumPy arrays"); that NumPy
// itself reads our files and we read NumPy's is checked live in tests/tool/check_tool.py.
#include <doctest/doctest.h>

#include <cstdio>
#include <fstream>
#include <stdexcept>
#include <string>
#include <vector>

#include "kindling/io/npy.hpp"

using namespace kindling;

namespace {

// A .npy file from a header dictionary and raw data, padded as NumPy pads it.
std::string file_of(const std::string& dict, const std::string& data, int major = 1) {
  std::string h = dict;
  const std::size_t prefix = major == 1 ? 10 : 12;
  h.append((64 - (prefix + h.size() + 1) % 64) % 64, ' ');
  h += '\n';
  std::string out("\x93NUMPY", 6);
  out += static_cast<char>(major);
  out += '\0';
  for (std::size_t k = 0; k < prefix - 8; ++k) out += static_cast<char>((h.size() >> (8 * k)) & 0xff);
  return out + h + data;
}

std::string message_of(const std::string& bytes) {
  try {
    parse_npy(bytes, "'x.npy'");
  } catch (const std::exception& e) {
    return e.what();
  }
  return "";
}

std::string slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
}

}  // namespace

TEST_CASE("encode_npy writes NumPy's version 1.0 header, 64-byte aligned, little-endian data") {
  const npy_array a = make_npy<float>({2, 3}, {1, 2, 3, 4, 5, -0.5f});
  const std::string f = encode_npy(a);
  CHECK_MESSAGE(f.compare(0, 8, std::string("\x93NUMPY\x01\x00", 8)) == 0, "expected magic and version 1.0");
  const std::size_t header = static_cast<unsigned char>(f[8]) | (static_cast<std::size_t>(static_cast<unsigned char>(f[9])) << 8);
  CHECK_MESSAGE((10 + header) % 64 == 0, "expected the data to start on a 64-byte boundary");
  CHECK(f.substr(10, header).rfind("{'descr': '<f4', 'fortran_order': False, 'shape': (2, 3), }", 0) == 0);
  CHECK(f[9 + header] == '\n');
  // -0.5f = 0xbf000000, little-endian last four bytes
  CHECK(static_cast<unsigned char>(f[f.size() - 1]) == 0xbf);
  CHECK(static_cast<unsigned char>(f[f.size() - 4]) == 0x00);
}

TEST_CASE("every element type round-trips through encode and parse, values exact") {
  SUBCASE("f32") {
    const npy_array b = parse_npy(encode_npy(make_npy<float>({3}, {0.1f, -2.0f, 1e-30f})));
    CHECK(b.type == npy_type::f32);
    CHECK(b.shape == std::vector<std::uint64_t>{3});
    CHECK(b.value(0) == static_cast<double>(0.1f));
    CHECK(b.value(2) == static_cast<double>(1e-30f));
  }
  SUBCASE("f64") {
    const npy_array b = parse_npy(encode_npy(make_npy<double>({1, 2}, {0.1, -1e300})));
    CHECK(b.type == npy_type::f64);
    CHECK(b.values() == std::vector<double>{0.1, -1e300});
  }
  SUBCASE("f16") {
    const npy_array b = parse_npy(encode_npy(make_npy<float16>({2}, {round_to_float16(0.5f), float16{0x3c01}})));
    CHECK(b.type == npy_type::f16);
    CHECK(b.value(0) == 0.5);
    CHECK(b.value(1) == 1.0 + 0x1p-10);  // 0x3c01: 1 + 2^-10 (IEEE 754 binary16)
  }
  SUBCASE("bf16 as u2 bit patterns in a field named bf16") {
    const std::string f = encode_npy(make_npy<bfloat16>({2}, {bfloat16{0x3f80}, bfloat16{0xc000}}));
    CHECK(f.find("'descr': [('bf16', '<u2')]") != std::string::npos);
    const npy_array b = parse_npy(f);
    CHECK(b.type == npy_type::bf16);
    CHECK(b.value(0) == 1.0);   // 0x3f80 is 1.0
    CHECK(b.value(1) == -2.0);  // 0xc000 is -2.0
  }
  SUBCASE("a 0-d array and an empty one") {
    CHECK(parse_npy(encode_npy(make_npy<float>({}, {3.0f}))).value(0) == 3.0);
    CHECK(parse_npy(encode_npy(make_npy<float>({0, 4}, {}))).size() == 0);
  }
}

TEST_CASE("parse_npy reads headers as NumPy and older NumPy write them") {
  const std::string data(8, '\0');
  SUBCASE("version 2.0 with a 4-byte header length") {
    CHECK(parse_npy(file_of("{'descr': '<f4', 'fortran_order': False, 'shape': (2,), }", data, 2)).size() == 2);
  }
  SUBCASE("keys in another order, double quotes, no trailing comma, Python 2 long suffix") {
    const npy_array a = parse_npy(file_of("{\"shape\": (1L, 2L), \"fortran_order\": False, \"descr\": \"<f4\"}", data));
    CHECK(a.shape == std::vector<std::uint64_t>{1, 2});
  }
}

TEST_CASE("parse_npy refuses every malformed file with a message naming what is wrong") {
  const std::string ok_dict = "{'descr': '<f4', 'fortran_order': False, 'shape': (2,), }";
  const std::string data(8, '\0');
  struct bad_case {
    const char* what;
    std::string bytes;
    const char* expected;
  };
  const std::vector<bad_case> cases{
      {"no magic", "PK\x03\x04 not numpy at all", "magic"},
      {"too short", std::string("\x93NUMPY\x01", 7), "magic"},
      {"version 3.0", [&] { std::string f = file_of(ok_dict, data); f[6] = 3; return f; }(), "version 3.0, expected 1.0 or 2.0"},
      {"version 1.1", [&] { std::string f = file_of(ok_dict, data); f[7] = 1; return f; }(), "version 1.1"},
      {"header longer than the file", [&] { std::string f = file_of(ok_dict, data); f[9] = 0x7f; return f; }(), "runs past the end"},
      {"big-endian", file_of("{'descr': '>f4', 'fortran_order': False, 'shape': (2,), }", data), "big-endian"},
      {"integers", file_of("{'descr': '<i4', 'fortran_order': False, 'shape': (2,), }", data), "'<i4'"},
      {"plain u2 without the bf16 field", file_of("{'descr': '<u2', 'fortran_order': False, 'shape': (4,), }", data), "bf16"},
      {"another field name", file_of("{'descr': [('x', '<u2')], 'fortran_order': False, 'shape': (4,), }", data), "[('x', '<u2')]"},
      {"fortran order", file_of("{'descr': '<f4', 'fortran_order': True, 'shape': (2,), }", data), "fortran_order True"},
      {"unknown key", file_of("{'descr': '<f4', 'fortran_order': False, 'shape': (2,), 'extra': 1}", data), "'extra'"},
      {"repeated key", file_of("{'descr': '<f4', 'descr': '<f4', 'fortran_order': False, 'shape': (2,), }", data), "twice"},
      {"missing shape", file_of("{'descr': '<f4', 'fortran_order': False, }", data), "no key 'shape'"},
      {"shape not a tuple", file_of("{'descr': '<f4', 'fortran_order': False, 'shape': [2], }", data), "tuple"},
      {"1-tuple without comma", file_of("{'descr': '<f4', 'fortran_order': False, 'shape': (2), }", data), "1-tuple"},
      {"negative size", file_of("{'descr': '<f4', 'fortran_order': False, 'shape': (-2,), }", data), "non-negative integer"},
      {"fortran_order not a bool", file_of("{'descr': '<f4', 'fortran_order': 0, 'shape': (2,), }", data), "True or False"},
      {"garbage after the dict", file_of(ok_dict + " x", data), "final newline"},
      {"no final newline", [&] { std::string f = file_of(ok_dict, data); f[f.size() - 9] = ' '; return f; }(), "final newline"},
      {"unterminated string", file_of("{'descr': '<f4", data), "string"},
      {"too little data", file_of(ok_dict, std::string(7, '\0')), "needs 8 data bytes, the file holds 7"},
      {"too much data", file_of(ok_dict, std::string(9, '\0')), "needs 8 data bytes, the file holds 9"},
      {"element count overflows", file_of("{'descr': '<f4', 'fortran_order': False, 'shape': (4294967296, 4294967296), }", data), "64 bits"},
      {"byte count overflows", file_of("{'descr': '<f8', 'fortran_order': False, 'shape': (4611686018427387904,), }", data), "more than 2^64"},
      {"size past 64 bits", file_of("{'descr': '<f4', 'fortran_order': False, 'shape': (99999999999999999999,), }", data), "64 bits"},
  };
  for (const bad_case& c : cases) {
    CAPTURE(c.what);
    const std::string m = message_of(c.bytes);
    CHECK_MESSAGE(m.find("'x.npy'") != std::string::npos, "expected the message to name the source: ", m);
    CHECK_MESSAGE(m.find(c.expected) != std::string::npos, "expected '", c.expected, "' in: ", m);
  }
  SUBCASE("sizes are std::length_error, syntax std::invalid_argument") {
    CHECK_THROWS_AS(parse_npy(file_of(ok_dict, std::string(7, '\0'))), std::length_error);
    CHECK_THROWS_AS(parse_npy(file_of("{'descr': '<f4'}", data)), std::invalid_argument);
  }
}

TEST_CASE("make_npy and encode_npy refuse data that does not fit the shape") {
  CHECK_THROWS_AS(make_npy<float>({2, 2}, {1, 2, 3}), std::length_error);
  npy_array a = make_npy<float>({2}, {1, 2});
  a.bytes.pop_back();
  CHECK_THROWS_AS(encode_npy(a), std::length_error);
}

TEST_CASE("encode_npy switches to version 2.0 when the header does not fit in 65535 bytes") {
  // A rank-5000 shape of ones gives a header of about 15000 bytes: still 1.0.
  std::vector<std::uint64_t> shape(5000, 1);
  CHECK(encode_npy(make_npy<float>(shape, {1.0f}))[6] == 1);
  // Rank 25000: about 75000 bytes, so 2.0, and it reads back.
  shape.assign(25000, 1);
  const std::string f = encode_npy(make_npy<float>(shape, {2.0f}));
  CHECK(f[6] == 2);
  CHECK(parse_npy(f).shape.size() == 25000);
}

TEST_CASE("write_npy replaces a file only when the new content is complete") {
  const std::string path = "kindling_test_tool_write.npy";
  std::remove(path.c_str());
  write_npy(path, make_npy<float>({2}, {1, 2}));
  CHECK(read_npy(path).value(1) == 2.0);
  SUBCASE("a failed write leaves the old file as it was") {
    const std::string before = slurp(path);
    npy_array bad = make_npy<float>({2}, {3, 4});
    bad.bytes.pop_back();  // fails validation before anything is written
    CHECK_THROWS_AS(write_npy(path, bad), std::length_error);
    CHECK(slurp(path) == before);
    CHECK_THROWS_AS(write_npy("no_such_directory/x.npy", make_npy<float>({1}, {1})), std::invalid_argument);
  }
  SUBCASE("reading a missing file names it") {
    CHECK_THROWS_WITH_AS(read_npy("no_such_file.npy"), doctest::Contains("'no_such_file.npy'"), std::invalid_argument);
  }
  std::remove(path.c_str());
}
