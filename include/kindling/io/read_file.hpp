// kindling/io/read_file.hpp: reading an input file with a size limit, so that a device
// (/dev/zero), a FIFO that never ends or a huge file is refused before memory runs out.
//
// bounded_reader opens the file and refuses a directory or a device at once, naming the
// path and what it is; read_up_to reads at most the bytes the caller may legitimately
// need (a spec, a header) and says whether the file held more. FIFOs and pipes are read
// (process substitution is a fair input), but never past the limit.
//
// Errors are std::invalid_argument naming `what` (e.g. "FILE"), the path and the reason.
// POSIX only (open, fstat, read); kindling's core does not include it.
#ifndef KINDLING_IO_READ_FILE_HPP
#define KINDLING_IO_READ_FILE_HPP

#include <cerrno>
#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <string>

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

namespace kindling {

namespace detail {

// Reads exactly `size` bytes from byte `at` of the open file `fd` (pread: retried when a
// signal interrupts it or it returns fewer bytes). Returns false if the file ends or a
// read fails first (a file that shrank while read), with *reached the byte it got to.
// The readers of .npz and safetensors files, which seek within one open file, share it.
inline bool read_exactly_at(int fd, std::uint64_t at, char* out, std::size_t size, std::uint64_t* reached) {
  while (size > 0) {
    const ssize_t n = ::pread(fd, out, size, static_cast<off_t>(at));
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      *reached = at;
      return false;
    }
    out += n;
    at += static_cast<std::uint64_t>(n);
    size -= static_cast<std::size_t>(n);
  }
  return true;
}

}  // namespace detail

/// An input file opened for bounded reading (move-only; closes on destruction).
class bounded_reader {
 public:
  bounded_reader(const std::string& path, const std::string& what) : path_(path), what_(what) {
    fd_ = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd_ < 0) fail("cannot be opened for reading (" + std::string(std::strerror(errno)) + ")");
    struct stat st;
    if (::fstat(fd_, &st) != 0) fail("cannot be inspected (" + std::string(std::strerror(errno)) + ")");
    if (S_ISDIR(st.st_mode)) fail("is a directory, expected a file");
    if (S_ISCHR(st.st_mode) || S_ISBLK(st.st_mode)) fail("is a device, expected a file");
    if (S_ISREG(st.st_mode)) size_ = static_cast<std::uint64_t>(st.st_size);
  }
  bounded_reader(const bounded_reader&) = delete;
  bounded_reader& operator=(const bounded_reader&) = delete;
  ~bounded_reader() {
    if (fd_ >= 0) ::close(fd_);
  }

  /// The size of a regular file (known before reading), or -1 for a FIFO.
  std::int64_t known_size() const { return size_ == unknown ? -1 : static_cast<std::int64_t>(size_); }

  /// Appends up to `limit` more bytes to `out`; returns false when the file holds more
  /// (the bytes past the limit are kept for the next call).
  bool read_up_to(std::string& out, std::uint64_t limit) {
    std::uint64_t got = 0;
    if (!pending_.empty()) {
      got = pending_.size() < limit ? pending_.size() : limit;
      out.append(pending_, 0, static_cast<std::size_t>(got));
      pending_.erase(0, static_cast<std::size_t>(got));
      if (!pending_.empty()) return false;
    }
    char buffer[1 << 16];
    for (;;) {
      // one byte past the limit tells a file of exactly `limit` bytes from a longer one
      const std::uint64_t want = limit - got + 1 < sizeof buffer ? limit - got + 1 : sizeof buffer;
      const ssize_t n = ::read(fd_, buffer, static_cast<std::size_t>(want));
      if (n < 0) {
        if (errno == EINTR) continue;
        fail("cannot be read (" + std::string(std::strerror(errno)) + ")");
      }
      if (n == 0) return true;
      const auto k = static_cast<std::uint64_t>(n);
      if (got + k > limit) {
        const auto take = static_cast<std::size_t>(limit - got);
        out.append(buffer, take);
        pending_.assign(buffer + take, static_cast<std::size_t>(k) - take);
        return false;
      }
      out.append(buffer, static_cast<std::size_t>(k));
      got += k;
    }
  }

  [[noreturn]] void fail(const std::string& why) const { throw std::invalid_argument(what_ + " '" + path_ + "' " + why); }

 private:
  static constexpr std::uint64_t unknown = ~std::uint64_t{0};
  std::string path_, what_;
  std::string pending_;  // bytes read past a limit, not yet handed out
  int fd_ = -1;
  std::uint64_t size_ = unknown;
};

/// The whole of a file of at most `limit` bytes; a longer one is refused, naming `what`
/// and `limit_text` (what the limit is for, e.g. "1 MiB, far above any network spec").
inline std::string read_file_bounded(const std::string& path, std::uint64_t limit, const std::string& what,
                                     const std::string& limit_text) {
  bounded_reader in(path, what);
  if (in.known_size() > static_cast<std::int64_t>(limit)) {
    in.fail("holds " + std::to_string(in.known_size()) + " bytes, expected at most " + limit_text);
  }
  std::string text;
  if (!in.read_up_to(text, limit)) in.fail("holds more than " + limit_text);
  return text;
}

}  // namespace kindling

#endif  // KINDLING_IO_READ_FILE_HPP
