// Files written and read by kindling's io headers under hostile conditions (issue 17):
// a link planted beside the output, a symlinked output, odd file types, a 254-byte
// name, two writers at once, endless and nested input. Each test works in a fresh
// directory under the system's temporary directory and removes it.
#include <doctest/doctest.h>

#include <cstdlib>
#include <fstream>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include <dirent.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../examples/tool/spec.hpp"
#include "../support/errors.hpp"
#include "kindling/io/npy.hpp"
#include "kindling/io/read_file.hpp"
#include "kindling/io/replace_file.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {

// A fresh directory for one test, removed (with the files the test left) at the end.
struct scratch {
  std::string dir;
  scratch() {
    char name[] = "/tmp/kindling-files-XXXXXX";
    REQUIRE(::mkdtemp(name) != nullptr);
    dir = name;
  }
  ~scratch() {
    for (const std::string& n : names()) ::unlink((dir + "/" + n).c_str());
    ::rmdir(dir.c_str());
  }
  std::string path(const std::string& name) const { return dir + "/" + name; }
  std::vector<std::string> names() const {
    std::vector<std::string> out;
    if (DIR* d = ::opendir(dir.c_str())) {
      while (const dirent* e = ::readdir(d)) {
        const std::string n = e->d_name;
        if (n != "." && n != "..") out.push_back(n);
      }
      ::closedir(d);
    }
    return out;
  }
};

std::string slurp(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
}

void put(const std::string& path, const std::string& text) {
  std::ofstream(path, std::ios::binary) << text;
}

}  // namespace

TEST_CASE("replace_file neither follows nor consumes a link planted under the old temporary name") {
  const scratch s;
  put(s.path("victim"), "victim");
  REQUIRE(::symlink(s.path("victim").c_str(), s.path("out.npy.kindling-partial").c_str()) == 0);
  write_npy(s.path("out.npy"), make_npy<float>({2}, std::vector<float>{1.0f, 2.0f}));
  CHECK(slurp(s.path("victim")) == "victim");
  struct stat st;
  REQUIRE(::lstat(s.path("out.npy.kindling-partial").c_str(), &st) == 0);
  CHECK(S_ISLNK(st.st_mode));
  CHECK(read_npy(s.path("out.npy")).values() == std::vector<double>{1.0, 2.0});
  CHECK(s.names().size() == 3);  // victim, the link, out.npy: no temporary left
}

TEST_CASE("replace_file writes through a symlinked output, keeping the link and the target's mode") {
  const scratch s;
  put(s.path("target"), "old");
  REQUIRE(::chmod(s.path("target").c_str(), 0640) == 0);
  REQUIRE(::symlink("target", s.path("link").c_str()) == 0);
  replace_file(s.path("link"), "new content", "-o");
  struct stat st;
  REQUIRE(::lstat(s.path("link").c_str(), &st) == 0);
  CHECK(S_ISLNK(st.st_mode));
  CHECK(slurp(s.path("target")) == "new content");
  REQUIRE(::stat(s.path("target").c_str(), &st) == 0);
  CHECK((st.st_mode & 0777) == 0640);
}

TEST_CASE("replace_file refuses a directory, a FIFO and a dangling link, naming the option, path and reason") {
  const scratch s;
  REQUIRE(::mkdir(s.path("d").c_str(), 0755) == 0);
  REQUIRE(::mkfifo(s.path("f").c_str(), 0644) == 0);
  REQUIRE(::symlink("nowhere", s.path("dangling").c_str()) == 0);
  const std::string md = message_of<std::invalid_argument>([&] { replace_file(s.path("d"), "x", "--svg"); });
  CHECK(mentions(md, "--svg '" + s.path("d") + "'"));
  CHECK(mentions(md, "is a directory"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { replace_file(s.path("f"), "x", "-o"); }), "is a FIFO"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { replace_file(s.path("dangling"), "x", "-o"); }),
                 "No such file or directory"));
  const std::string mn = message_of<std::invalid_argument>([&] { replace_file(s.path("no/such/x"), "x", "-o"); });
  CHECK(mentions(mn, "No such file or directory"));
  struct stat st;
  REQUIRE(::lstat(s.path("f").c_str(), &st) == 0);
  CHECK(S_ISFIFO(st.st_mode));
  CHECK(s.names().size() == 3);  // d, f and dangling: no temporary left
  ::rmdir(s.path("d").c_str());
}

TEST_CASE("replace_file writes a 254-byte name, its temporary name shortened to fit NAME_MAX") {
  const scratch s;
  const std::string name(254, 'w');
  replace_file(s.path(name), "pump");
  CHECK(slurp(s.path(name)) == "pump");
  CHECK(s.names() == std::vector<std::string>{name});
}

TEST_CASE("two writers replacing one file at once each succeed and leave one complete file") {
  const scratch s;
  const std::string a(1 << 20, 'a'), b(1 << 20, 'b');
  bool failed = false;
  std::thread ta([&] {
    for (int k = 0; k < 20; ++k) {
      try {
        replace_file(s.path("belt.npy"), a);
      } catch (const std::exception&) {
        failed = true;
      }
    }
  });
  for (int k = 0; k < 20; ++k) replace_file(s.path("belt.npy"), b);
  ta.join();
  CHECK_FALSE(failed);
  const std::string got = slurp(s.path("belt.npy"));
  CHECK((got == a || got == b));
  CHECK(s.names().size() == 1);
}

TEST_CASE("readers stop at their limit: a device, a directory, a huge spec and a deep spec are refused") {
  const scratch s;
  CHECK(mentions(message_of<std::invalid_argument>([] { read_npy("/dev/zero", 1 << 20, "FILE"); }),
                 "FILE '/dev/zero' is a device"));
  CHECK(mentions(message_of<std::invalid_argument>([&] { read_network_spec(s.dir, "SPEC"); }), "is a directory"));
  put(s.path("big.json"), std::string(spec_max_bytes + 1, ' '));
  CHECK(mentions(message_of<std::invalid_argument>([&] { read_network_spec(s.path("big.json")); }), "1 MiB"));
  const std::string deep = "{\"input\": " + std::string(200000, '[') + std::string(200000, ']') + "}";
  CHECK(mentions(message_of<std::invalid_argument>([&] { parse_network_spec(deep); }), "nested deeper than 32"));
  // a header announcing more elements than the caller allows is refused before its data
  const npy_array wide = make_npy<float>({64, 64}, std::vector<float>(64 * 64, 0.5f));
  put(s.path("wide.npy"), encode_npy(wide));
  CHECK(mentions(message_of<std::length_error>([&] { read_npy(s.path("wide.npy"), 1000); }),
                 "4096 elements, expected at most 1000"));
  CHECK(read_npy(s.path("wide.npy")).shape == std::vector<std::uint64_t>{64, 64});
  put(s.path("long.npy"), encode_npy(wide) + "x");
  CHECK(mentions(message_of<std::length_error>([&] { read_npy(s.path("long.npy")); }), "holds more"));
}

TEST_CASE("a spec gain whose square overflows is refused under its own key") {
  const std::string text = R"({"input": {"width": 8}, "layers": [{"width": 4, "activation": "relu",
                               "scheme": "he-normal", "gain": 1e200}]})";
  const std::string m = message_of<std::domain_error>([&] { parse_network_spec(text); });
  CHECK(mentions(m, "'layers[0].gain' = 1e+200"));
  CHECK_FALSE(mentions(m, "weight_variance"));
}
