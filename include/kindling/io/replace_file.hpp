// kindling/io/replace_file.hpp: writing a whole file safely, so that whatever happens
// the file at the path is either its old content or the complete new one.
//
// The bytes go to a temporary file created exclusively (O_CREAT | O_EXCL | O_NOFOLLOW)
// under a fresh random name in the target's own directory, are fsync'd, and the file is
// then renamed over the target, which is atomic on POSIX file systems. A link or a file
// planted under a temporary name is never followed or consumed: the name is unpredictable
// and an existing one makes the creation fail, and we try another.
//
// What the target may be:
//   - absent: a new regular file (mode 0666 less the umask);
//   - a regular file: replaced, keeping its permission bits (rwx for user, group and
//     others; set-user-ID and the like are not carried over); one we may not write
//     (access(W_OK)) is refused, as a redirection would refuse it;
//   - a symbolic link: written THROUGH. The link stays a link, and the file it resolves
//     to (every link followed) is replaced as above. A dangling link or a loop is refused.
//     The final rename never follows a link, so a link swapped in meanwhile is replaced,
//     not written through;
//   - a directory, a device, a FIFO or a socket: refused, with nothing written.
// Errors are std::invalid_argument (a path we refuse) or std::runtime_error (the system
// failed us: a full disk, a failed rename); both name `what` (e.g. "-o"), the path and
// the reason (strerror). On every error the temporary file is removed.
//
// POSIX only (open, fsync, rename, realpath); kindling's core does not include it.
#ifndef KINDLING_IO_REPLACE_FILE_HPP
#define KINDLING_IO_REPLACE_FILE_HPP

#include <cerrno>
#include <climits>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>
#include <stdexcept>
#include <string>

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

namespace kindling {

namespace detail {

inline std::string file_reason(int error) { return std::strerror(error); }

[[noreturn]] inline void file_refuse(const std::string& what, const std::string& path, const std::string& why) {
  throw std::invalid_argument(what + " '" + path + "': " + why);
}

[[noreturn]] inline void file_fail(const std::string& what, const std::string& path, const std::string& doing,
                                   int error) {
  throw std::runtime_error(what + " '" + path + "': " + doing + ": " + file_reason(error));
}

// The kind of a non-regular file, for a refusal.
inline const char* file_kind(mode_t m) {
  if (S_ISDIR(m)) return "a directory";
  if (S_ISCHR(m) || S_ISBLK(m)) return "a device";
  if (S_ISFIFO(m)) return "a FIFO";
  if (S_ISSOCK(m)) return "a socket";
  return "not a regular file";
}

// The directory part of a path ("." when it has none) and its last component.
inline std::string file_directory(const std::string& path) {
  const std::size_t slash = path.find_last_of('/');
  if (slash == std::string::npos) return ".";
  return slash == 0 ? "/" : path.substr(0, slash);
}
inline std::string file_base(const std::string& path) {
  const std::size_t slash = path.find_last_of('/');
  return slash == std::string::npos ? path : path.substr(slash + 1);
}

// A temporary name beside `base`: a dot, at most 40 bytes of the base (cut before a
// UTF-8 continuation byte), 16 random hex digits and ".kindling-tmp": at most 71 bytes,
// well inside NAME_MAX (255) whatever the target's name.
inline std::string temporary_name(const std::string& base, std::uint64_t random) {
  std::size_t keep = base.size() < 40 ? base.size() : 40;
  while (keep > 0 && keep < base.size() && (static_cast<unsigned char>(base[keep]) & 0xC0u) == 0x80u) --keep;
  char hex[17];
  std::snprintf(hex, sizeof hex, "%016llx", static_cast<unsigned long long>(random));
  return "." + base.substr(0, keep) + "." + hex + ".kindling-tmp";
}

// Where the bytes must go: `path`, or the file a symbolic link at `path` resolves to.
// Sets *mode to the permission bits to keep (or leaves it at -1 for a new file).
inline std::string resolve_output(const std::string& what, const std::string& path, long* mode) {
  *mode = -1;
  if (path.empty()) file_refuse(what, path, "empty path, expected a file name");
  struct stat st;
  if (::lstat(path.c_str(), &st) != 0) {
    if (errno != ENOENT) file_fail(what, path, "cannot inspect it", errno);
    // A new file: its directory must exist and take new files.
    const std::string dir = file_directory(path);
    struct stat ds;
    int error = 0;
    if (::stat(dir.c_str(), &ds) != 0) error = errno;
    else if (!S_ISDIR(ds.st_mode)) error = ENOTDIR;
    else if (::access(dir.c_str(), W_OK | X_OK) != 0) error = errno;
    if (error != 0) {
      file_refuse(what, path, "its directory '" + dir + "' cannot take a new file (" + file_reason(error) + ")");
    }
    return path;
  }
  std::string target = path;
  if (S_ISLNK(st.st_mode)) {
    char* real = ::realpath(path.c_str(), nullptr);
    if (real == nullptr) {
      file_refuse(what, path, "is a symbolic link that cannot be resolved (" + file_reason(errno) +
                                  "); expected a link to an existing regular file");
    }
    target = real;
    std::free(real);
    if (::stat(target.c_str(), &st) != 0) file_fail(what, path, "cannot inspect the file it links to", errno);
  }
  if (!S_ISREG(st.st_mode)) {
    file_refuse(what, path, std::string("is ") + file_kind(st.st_mode) + ", expected a regular file to write");
  }
  if (::access(target.c_str(), W_OK) != 0) {
    file_refuse(what, path, "cannot be written (" + file_reason(errno) + "); expected a writable file");
  }
  *mode = static_cast<long>(st.st_mode & 0777);
  return target;
}

// Writes every byte to fd; false (errno set) on failure.
inline bool write_all(int fd, const char* data, std::size_t size) {
  while (size > 0) {
    const ssize_t n = ::write(fd, data, size);
    if (n < 0) {
      if (errno == EINTR) continue;
      return false;
    }
    data += n;
    size -= static_cast<std::size_t>(n);
  }
  return true;
}

}  // namespace detail

/// Checks that `path` may be written by replace_file, without writing anything:
/// refuses directories, devices, FIFOs, sockets, unresolvable links and read-only files.
/// Returns the path that will be replaced (a symbolic link's target, else `path`).
inline std::string check_replaceable(const std::string& path, const std::string& what = "output") {
  long mode = -1;
  return detail::resolve_output(what, path, &mode);
}

/// Where replace_file_streamed's producer writes the new content, in order.
class file_sink {
 public:
  file_sink(int fd, const std::string& what, const std::string& path) : fd_(fd), what_(what), path_(path) {}
  void write(const char* data, std::size_t size) {
    if (!detail::write_all(fd_, data, size)) detail::file_fail(what_, path_, "cannot write", errno);
    written_ += size;
  }
  std::uint64_t written() const noexcept { return written_; }

 private:
  int fd_;
  const std::string& what_;
  const std::string& path_;
  std::uint64_t written_ = 0;
};

/// Replaces the file at `path` (see the top of this header) by what `produce(sink)`
/// writes to its file_sink, piece by piece: a file larger than memory can be written.
/// If produce throws, the temporary file is removed, the target is left as it was and
/// the exception goes on. `what` names the output in error messages.
template <class Produce>
void replace_file_streamed(const std::string& path, Produce&& produce, const std::string& what = "output") {
  using namespace detail;
  long mode = -1;
  const std::string target = resolve_output(what, path, &mode);
  const std::string dir = file_directory(target);
  std::random_device entropy;
  std::string temp;
  int fd = -1;
  for (int attempt = 0; attempt < 64 && fd < 0; ++attempt) {
    const std::uint64_t r = (static_cast<std::uint64_t>(entropy()) << 32) ^ entropy();
    temp = (dir == "/" ? "" : dir) + "/" + temporary_name(file_base(target), r);
    fd = ::open(temp.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_NOFOLLOW | O_CLOEXEC, 0666);
    if (fd < 0 && errno != EEXIST) file_fail(what, path, "cannot create a temporary file in '" + dir + "'", errno);
  }
  if (fd < 0) file_fail(what, path, "cannot find a free temporary name in '" + dir + "'", EEXIST);
  const auto abandon = [&](const char* doing) {
    const int error = errno;
    if (fd >= 0) ::close(fd);
    ::unlink(temp.c_str());
    file_fail(what, path, doing, error);
  };
  if (mode >= 0 && ::fchmod(fd, static_cast<mode_t>(mode)) != 0) abandon("cannot keep the file's mode");
  try {
    file_sink sink(fd, what, path);
    produce(sink);
  } catch (...) {
    ::close(fd);
    ::unlink(temp.c_str());
    throw;
  }
  if (::fsync(fd) != 0) abandon("cannot flush to disk");
  const int closed = ::close(fd);
  fd = -1;
  if (closed != 0) abandon("cannot close");
  if (::rename(temp.c_str(), target.c_str()) != 0) abandon("cannot replace it");
  // Make the rename itself durable; a directory that cannot be synced loses nothing.
  const int dfd = ::open(dir.c_str(), O_RDONLY | O_DIRECTORY | O_CLOEXEC);
  if (dfd >= 0) {
    (void)::fsync(dfd);
    ::close(dfd);
  }
}

/// Replaces the file at `path` (see the top of this header) by `bytes`. `what` names the
/// output in error messages (an option such as "-o", or "output").
inline void replace_file(const std::string& path, const std::string& bytes, const std::string& what = "output") {
  replace_file_streamed(path, [&](file_sink& sink) { sink.write(bytes.data(), bytes.size()); }, what);
}

}  // namespace kindling

#endif  // KINDLING_IO_REPLACE_FILE_HPP
