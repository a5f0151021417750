// examples/tool/checkpoint.cpp: see checkpoint.hpp.
#include "checkpoint.hpp"

#include <algorithm>
#include <cstdio>
#include <cstring>
#include <stdexcept>

#include <fcntl.h>
#include <unistd.h>

#include <kindling/io/safetensors.hpp>
#ifdef KINDLING_TOOL_NPZ
#include <kindling/io/npz.hpp>
#else
namespace kindling {
class npz_reader {};  // this build has no zlib: .npz files are refused
}  // namespace kindling
#endif

namespace kindling::tool {

namespace {

// Whether the file starts as a zip archive does: "PK" and a local header, an empty
// archive's end record or a zip64 end record.
bool starts_as_zip(const std::string& path) {
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) return false;  // the reader says why
  unsigned char head[4] = {0, 0, 0, 0};
  const ssize_t n = ::read(fd, head, 4);
  ::close(fd);
  return n == 4 && head[0] == 'P' && head[1] == 'K' &&
         ((head[2] == 3 && head[3] == 4) || (head[2] == 5 && head[3] == 6) || (head[2] == 6 && head[3] == 6));
}

}  // namespace

checkpoint::checkpoint(const std::string& path, const std::string& what) {
  if (starts_as_zip(path)) {
#ifdef KINDLING_TOOL_NPZ
    npz_ = std::make_unique<npz_reader>(path, what);
    for (const npz_entry& e : npz_->entries()) tensors_.push_back({e.name, e.dtype, e.shape, e.data_bytes});
#else
    throw std::invalid_argument(what + " '" + path + "' is an .npz (zip) file, and this kindling was built without "
                                "zlib, so without .npz support; expected a safetensors file");
#endif
  } else {
    st_ = std::make_unique<safetensors_reader>(path, what);
    for (const safetensors_entry& e : st_->index().tensors) tensors_.push_back({e.name, e.dtype, e.shape, e.end - e.begin});
  }
}

checkpoint::~checkpoint() = default;

const checkpoint::tensor* checkpoint::find(const std::string& name) const {
  for (const tensor& t : tensors_) {
    if (t.name == name) return &t;
  }
  return nullptr;
}

void checkpoint::read(const tensor& t, const std::function<void(const char*, std::size_t)>& consume) const {
#ifdef KINDLING_TOOL_NPZ
  if (npz_) {
    npz_->read(*npz_->find(t.name), consume);
    return;
  }
#endif
  const safetensors_entry& e = *st_->index().find(t.name);
  std::vector<char> buffer(std::size_t{1} << 20);
  for (std::uint64_t off = 0; off < t.bytes;) {
    const auto n = static_cast<std::size_t>(std::min<std::uint64_t>(buffer.size(), t.bytes - off));
    st_->read(e, off, buffer.data(), n);
    consume(buffer.data(), n);
    off += n;
  }
}

void checkpoint::read_into(const tensor& t, char* out) const {
#ifdef KINDLING_TOOL_NPZ
  if (npz_) {
    std::uint64_t at = 0;
    npz_->read(*npz_->find(t.name), [&](const char* data, std::size_t n) {
      // The reader checks the member's sizes against its .npy header; this guards `out`.
      if (n > t.bytes - at) {
        throw std::length_error("npz member '" + t.name + "' streams more than its " + std::to_string(t.bytes) + " bytes");
      }
      std::memcpy(out + at, data, n);
      at += n;
    });
    return;
  }
#endif
  st_->read(*st_->index().find(t.name), 0, out, static_cast<std::size_t>(t.bytes));
}

std::shared_ptr<const char> checkpoint::map(const tensor& t) const {
  if (!st_) return nullptr;
  auto range = std::make_shared<mapped_range>(st_->map(*st_->index().find(t.name)));
  if (!*range) return nullptr;
  return std::shared_ptr<const char>(range, range->data());  // owns the mapping, points at the bytes
}

progress_line::progress_line(std::string command) : command_(std::move(command)), active_(::isatty(2) == 1) {}

progress_line::~progress_line() { clear(); }

void progress_line::show(const std::string& text, bool force) {
  if (!active_) return;
  const auto now = std::chrono::steady_clock::now();
  if (!force && shown_ && now - last_ < std::chrono::milliseconds(100)) return;
  last_ = now;
  shown_ = true;
  std::fprintf(stderr, "\r\033[K%s: %s", command_.c_str(), text.c_str());
  std::fflush(stderr);
}

void progress_line::clear() {
  if (!active_ || !shown_) return;
  std::fprintf(stderr, "\r\033[K");
  std::fflush(stderr);
  shown_ = false;
}

}  // namespace kindling::tool
