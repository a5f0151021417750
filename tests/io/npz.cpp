// Tests of kindling/io/npz.hpp: .npz files (zip archives of .npy members, PKWARE's
// APPNOTE) written stored, deflated and with zip64 fields read back bit for bit; the
// bytes are deterministic; damaged archives (sizes that lie, a truncated central
// directory, a member that is not .npy, a wrong CRC-32) are refused naming what is
// wrong. NumPy's side (np.load of our files, our reader on np.savez and
// np.savez_compressed) is tests/tool/check_models.py.
#include <doctest/doctest.h>

#include <cstdio>
#include <fstream>
#include <iterator>
#include <stdexcept>
#include <string>
#include <vector>

#include "kindling/io/npz.hpp"

using namespace kindling;

namespace {

std::string temp_path(const std::string& name) { return "kindling_test_npz_" + name; }

std::string slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in), {});
}

void spit(const std::string& path, const std::string& bytes) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out.write(bytes.data(), static_cast<std::streamsize>(bytes.size()));
}

std::vector<std::pair<std::string, npy_array>> sample_arrays() {
  std::vector<float> f(6 * 70);
  for (std::size_t i = 0; i < f.size(); ++i) f[i] = static_cast<float>(i % 7) * 0.25f - 1.0f;
  std::vector<double> d{1.5, -2.25, 3.0};
  std::vector<bfloat16> b;
  for (int i = 0; i < 40; ++i) b.push_back(round_to_bfloat16(static_cast<float>(i) / 8.0f));
  std::vector<float16> h;
  for (int i = 0; i < 12; ++i) h.push_back(round_to_float16(static_cast<float>(i) - 6.0f));
  return {{"front.conv1.weight", make_npy<float>({6, 70}, f)},
          {"head.bias", make_npy<double>({3}, d)},
          {"gru.w_ih", make_npy<bfloat16>({5, 8}, b)},
          {"h", make_npy<float16>({2, 2, 3}, h)}};
}

void check_same(const std::string& path) {
  const auto want = sample_arrays();
  const npz_reader r(path);
  REQUIRE(r.entries().size() == want.size());
  for (std::size_t i = 0; i < want.size(); ++i) {
    const npz_entry& e = r.entries()[i];
    CHECK(e.name == want[i].first);
    CHECK(e.shape == want[i].second.shape);
    CHECK(e.dtype == want[i].second.type);
    CHECK(r.array(e).bytes == want[i].second.bytes);
  }
  const auto all = read_npz(path);
  CHECK(all.at("head.bias").values() == std::vector<double>{1.5, -2.25, 3.0});
}

std::string open_error(const std::string& bytes, const std::string& name) {
  const std::string path = temp_path(name);
  spit(path, bytes);
  try {
    const npz_reader r(path);
    for (const npz_entry& e : r.entries()) (void)r.array(e);
  } catch (const std::invalid_argument& e) {
    std::remove(path.c_str());
    return e.what();
  }
  std::remove(path.c_str());
  return "";
}

std::uint64_t le(const std::string& s, std::size_t at, int n) {
  std::uint64_t v = 0;
  for (int k = n; k-- > 0;) v = (v << 8) | static_cast<unsigned char>(s[at + static_cast<std::size_t>(k)]);
  return v;
}
void set_le(std::string& s, std::size_t at, int n, std::uint64_t v) {
  for (int k = 0; k < n; ++k) s[at + static_cast<std::size_t>(k)] = static_cast<char>((v >> (8 * k)) & 0xffu);
}

// A file written by write_npz, and where its central directory is (no zip64 end record).
struct archive {
  std::string bytes;
  std::size_t directory = 0, end = 0;
};
archive written(bool compress) {
  const std::string path = temp_path(compress ? "d.npz" : "s.npz");
  npz_options o;
  o.compress = compress;
  write_npz(path, sample_arrays(), o);
  archive a;
  a.bytes = slurp(path);
  std::remove(path.c_str());
  a.end = a.bytes.size() - 22;
  REQUIRE(le(a.bytes, a.end, 4) == 0x06054b50);
  a.directory = static_cast<std::size_t>(le(a.bytes, a.end + 16, 4));
  return a;
}

bool has(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

}  // namespace

TEST_CASE("npz: stored, deflated and zip64 archives read back bit for bit") {
  for (int mode = 0; mode < 3; ++mode) {
    CAPTURE(mode);
    npz_options o;
    o.compress = mode == 1;
    o.force_zip64 = mode == 2;
    const std::string path = temp_path("round.npz");
    write_npz(path, sample_arrays(), o);
    check_same(path);
    const std::string bytes = slurp(path);
    CHECK(bytes.compare(0, 4, "PK\x03\x04", 4) == 0);
    std::remove(path.c_str());
  }
}

TEST_CASE("npz: the same arrays give the same bytes; deflate makes a compressible file smaller") {
  const archive a = written(false), b = written(false);
  CHECK(a.bytes == b.bytes);
  std::vector<float> zeros(100000, 0.0f);
  const std::string s = temp_path("zs.npz"), d = temp_path("zd.npz");
  write_npz(s, {{"z", make_npy<float>({100000}, zeros)}});
  npz_options o;
  o.compress = true;
  write_npz(d, {{"z", make_npy<float>({100000}, zeros)}}, o);
  CHECK(slurp(d).size() * 50 < slurp(s).size());
  CHECK(read_npz(d).at("z").values() == std::vector<double>(100000, 0.0));
  std::remove(s.c_str());
  std::remove(d.c_str());
}

TEST_CASE("npz: many members get a zip64 end record (65535 or more)") {
  std::vector<npz_source> many;
  for (int i = 0; i < 65600; ++i) {
    many.push_back({"a" + std::to_string(i), element_kind::f32, {1},
                    [i](std::uint64_t, char* out, std::size_t) {
                      const float x = static_cast<float>(i);
                      std::memcpy(out, &x, 4);
                    }});
  }
  const std::string path = temp_path("many.npz");
  write_npz(path, many);
  const npz_reader r(path);
  REQUIRE(r.entries().size() == 65600);
  CHECK(r.array(r.entries()[65599]).values() == std::vector<double>{65599.0});
  CHECK(r.find("a12345") != nullptr);
  std::remove(path.c_str());
}

TEST_CASE("npz: sizes that lie are refused, naming the member") {
  for (bool compress : {false, true}) {
    CAPTURE(compress);
    archive a = written(compress);
    // The first member's compressed size in the central directory: 20 bytes into its header.
    std::string longer = a.bytes;
    set_le(longer, a.directory + 20, 4, le(a.bytes, a.directory + 20, 4) + 100000);
    std::string e = open_error(longer, "long.npz");
    CHECK(has(e, "member 'front.conv1.weight.npy'"));
    CHECK(has(e, "lies about its sizes"));
    // The uncompressed size one element short.
    std::string shorter = a.bytes;
    set_le(shorter, a.directory + 24, 4, le(a.bytes, a.directory + 24, 4) - 4);
    if (!compress) set_le(shorter, a.directory + 20, 4, le(a.bytes, a.directory + 20, 4) - 4);
    e = open_error(shorter, "short.npz");
    CHECK(has(e, "front.conv1.weight.npy"));
    CHECK(has(e, "lies about its sizes"));
    // A wrong CRC-32: found when the member is read.
    std::string crc = a.bytes;
    set_le(crc, a.directory + 16, 4, le(a.bytes, a.directory + 16, 4) ^ 1u);
    e = open_error(crc, "crc.npz");
    CHECK(has(e, "member 'front.conv1.weight.npy' has CRC-32"));
  }
  archive a = written(false);
  std::string stored = a.bytes;  // a stored member whose two sizes differ
  set_le(stored, a.directory + 20, 4, le(a.bytes, a.directory + 20, 4) - 1);
  CHECK(has(open_error(stored, "stored.npz"), "is stored, yet its sizes differ"));
}

TEST_CASE("npz: a truncated or misplaced central directory is refused") {
  const archive a = written(true);
  // The end record claims one member more than the directory holds.
  std::string more = a.bytes;
  set_le(more, a.end + 8, 2, 5);
  set_le(more, a.end + 10, 2, 5);
  CHECK(has(open_error(more, "more.npz"), "central directory entry 4 of 5 runs past the directory's end"));
  // The directory cut short: its last 10 bytes gone, the end record moved up.
  std::string cut = a.bytes.substr(0, a.end - 10) + a.bytes.substr(a.end);
  CHECK(has(open_error(cut, "cut.npz"), "does not end where its end record starts"));
  std::string cut_fixed = cut;
  set_le(cut_fixed, a.end - 10 + 12, 4, le(a.bytes, a.end + 12, 4) - 10);
  CHECK(has(open_error(cut_fixed, "cutfixed.npz"), "the central directory is truncated"));
  // The file cut anywhere loses its end record.
  CHECK(has(open_error(a.bytes.substr(0, a.bytes.size() - 5), "tail.npz"), "has no zip end of central directory record"));
  CHECK(has(open_error("not a zip at all, just text that goes on", "text.npz"), "has no zip end of central directory record"));
  CHECK(has(open_error("PK", "tiny.npz"), "expected a zip archive"));
}

TEST_CASE("npz: a member that is not .npy, or not a valid .npy, is refused") {
  archive a = written(false);
  std::string renamed = a.bytes;
  for (std::size_t at = renamed.find("head.bias.npy"); at != std::string::npos; at = renamed.find("head.bias.npy", at + 1)) {
    renamed.replace(at + 10, 3, "txt");
  }
  CHECK(has(open_error(renamed, "txt.npz"), "member 'head.bias.txt' is not a .npy file"));
  std::string magic = a.bytes;  // the first member's data no longer starts with \x93NUMPY
  const std::size_t data = 30 + le(a.bytes, 26, 2) + le(a.bytes, 28, 2);
  magic[data + 1] = 'X';
  const std::string e = open_error(magic, "magic.npz");
  CHECK(has(e, "front.conv1.weight.npy"));
  CHECK(has(e, "does not start with the .npy magic string"));
}

TEST_CASE("npz: bad arguments are refused before anything is written") {
  const std::string path = temp_path("bad.npz");
  std::remove(path.c_str());
  const auto arrays = sample_arrays();
  CHECK_THROWS_WITH_AS(write_npz(path, {arrays[0], arrays[0]}), doctest::Contains("is given twice"), std::invalid_argument);
  npz_options o;
  o.compress = true;
  o.level = 11;
  CHECK_THROWS_WITH_AS(write_npz(path, arrays, o), doctest::Contains("expected a zlib level from 1 to 9"), std::invalid_argument);
  std::ifstream in(path);
  CHECK_FALSE(in.good());
}
