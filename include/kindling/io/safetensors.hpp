// kindling/io/safetensors.hpp: many named tensors in one file, in the open safetensors
// format. The layout (from memory of its public specification):
//
//   8 bytes     N, the header's length, an unsigned 64-bit little-endian integer
//   N bytes     a JSON object: for each tensor name {"dtype": "F32", "shape": [2, 3],
//               "data_offsets": [begin, end]}, offsets in bytes relative to the data
//               section, end exclusive; an optional "__metadata__" object of string
//               values. We pad the header with spaces to a multiple of 8 bytes.
//   the rest    the data section: each tensor's elements, row-major, little-endian.
//
// Writing is streamed: each tensor's bytes come from a callback that fills a buffer
// chunk by chunk, and go straight to the file (io/replace_file.hpp: an exclusive
// temporary file, then an atomic rename), so a file larger than memory can be written.
// Reading validates the whole header before any tensor is used: the header's length
// against the file and a 100 MB limit, the JSON (an object, each name once), each
// tensor's dtype, shape and offsets, and that the tensors tile the data section exactly
// (no overlap, no gap, nothing out of range). Every failure is std::invalid_argument
// naming the file, the tensor or key, the value and what was expected.
//
// Element types: F16, BF16, F32, F64. POSIX (pread) and nlohmann-json. The writer's
// sources hand it little-endian bytes on any host (parameter_bytes of model/plan.hpp
// converts with to_little_endian), so a big-endian host writes the same file.
#ifndef KINDLING_IO_SAFETENSORS_HPP
#define KINDLING_IO_SAFETENSORS_HPP

#include <algorithm>
#include <cerrno>
#include <cstdint>
#include <cstring>
#include <functional>
#include <map>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include <fcntl.h>
#include <sys/mman.h>
#include <sys/stat.h>
#include <unistd.h>

#include <nlohmann/json.hpp>

#include "../element.hpp"
#include "json_keys.hpp"
#include "read_file.hpp"
#include "replace_file.hpp"

namespace kindling {

/// The element types we read and write (element.hpp's kinds).
using tensor_dtype = element_kind;

inline const char* safetensors_dtype_name(tensor_dtype t) noexcept {
  switch (t) {
    case tensor_dtype::f16: return "F16";
    case tensor_dtype::bf16: return "BF16";
    case tensor_dtype::f32: return "F32";
    case tensor_dtype::f64: return "F64";
  }
  return "?";
}


/// The largest header we read: far above any real model's (about 100 bytes a tensor).
inline constexpr std::uint64_t safetensors_max_header = 100000000;

/// One tensor of a file: where its bytes are, relative to the data section.
struct safetensors_entry {
  std::string name;
  tensor_dtype dtype = tensor_dtype::f32;
  std::vector<std::uint64_t> shape;
  std::uint64_t begin = 0, end = 0;
};

/// A validated header.
struct safetensors_index {
  std::uint64_t data_start = 0;  // file offset of the data section
  std::vector<safetensors_entry> tensors;  // in file order
  std::map<std::string, std::string> metadata;

  const safetensors_entry* find(const std::string& name) const {
    for (const safetensors_entry& e : tensors) {
      if (e.name == name) return &e;
    }
    return nullptr;
  }
};

namespace detail {

[[noreturn]] inline void st_fail(const std::string& source, const std::string& what) {
  throw std::invalid_argument("safetensors " + source + ": " + what);
}

inline std::string st_value(const nlohmann::json& v) {
  std::string s = v.dump();
  if (s.size() > 60) s = s.substr(0, 57) + "...";
  return s;
}

// The element count of a shape, or false when it passes 2^64.
inline bool st_count(const std::vector<std::uint64_t>& shape, std::uint64_t* out) {
  std::uint64_t n = 1;
  for (std::uint64_t d : shape) {
    if (d != 0 && n > ~std::uint64_t{0} / d) return false;
    n *= d;
  }
  *out = n;
  return true;
}

inline std::uint64_t st_offset(const nlohmann::json& v, const std::string& source, const std::string& path) {
  if (!v.is_number_unsigned()) st_fail(source, "'" + path + "' = " + st_value(v) + ", expected a whole number >= 0");
  return v.get<std::uint64_t>();
}

}  // namespace detail

/// Validates the JSON header `text` of a file whose data section holds `data_size`
/// bytes; `source` names the file in messages.
inline safetensors_index parse_safetensors_header(const std::string& text, std::uint64_t data_size,
                                                  const std::string& source) {
  using detail::st_fail;
  using detail::st_value;
  repeated_json_key repeated;  // io/json_keys.hpp: a repeated tensor name, or key of one
  nlohmann::json doc;
  try {
    doc = detail::parse_json_noting_repeats(text, &repeated);
  } catch (const nlohmann::json::exception& e) {
    st_fail(source, "the header is not valid JSON (" + std::string(e.what()) + "), expected a JSON object");
  }
  if (!doc.is_object()) st_fail(source, "the header is " + st_value(doc) + ", expected a JSON object");
  if (repeated.depth == 1) {
    st_fail(source, "tensor '" + repeated.key + "' appears twice in the header, expected each name once");
  }
  if (!repeated.key.empty()) {
    st_fail(source, "key '" + repeated.key + "' appears twice in one object of the header, expected each key once");
  }
  safetensors_index index;
  for (auto it = doc.begin(); it != doc.end(); ++it) {
    const std::string& name = it.key();
    const nlohmann::json& v = it.value();
    if (name == "__metadata__") {
      if (!v.is_object()) st_fail(source, "'__metadata__' = " + st_value(v) + ", expected an object of strings");
      for (auto m = v.begin(); m != v.end(); ++m) {
        if (!m->is_string()) {
          st_fail(source, "'__metadata__." + m.key() + "' = " + st_value(*m) + ", expected a string");
        }
        index.metadata[m.key()] = m->get<std::string>();
      }
      continue;
    }
    const std::string at = "tensor '" + name + "'";
    if (!v.is_object()) st_fail(source, at + " = " + st_value(v) + ", expected an object with dtype, shape, data_offsets");
    for (auto k = v.begin(); k != v.end(); ++k) {
      if (k.key() != "dtype" && k.key() != "shape" && k.key() != "data_offsets") {
        st_fail(source, at + " has unknown key '" + k.key() + "', expected dtype, shape and data_offsets");
      }
    }
    for (const char* key : {"dtype", "shape", "data_offsets"}) {
      if (!v.contains(key)) st_fail(source, at + " has no key '" + key + "'");
    }
    safetensors_entry e;
    e.name = name;
    const nlohmann::json& dtype = v["dtype"];
    const std::string dt = dtype.is_string() ? dtype.get<std::string>() : dtype.dump();
    if (dt == "F16") e.dtype = tensor_dtype::f16;
    else if (dt == "BF16") e.dtype = tensor_dtype::bf16;
    else if (dt == "F32") e.dtype = tensor_dtype::f32;
    else if (dt == "F64") e.dtype = tensor_dtype::f64;
    else st_fail(source, at + ": dtype = " + st_value(dtype) + ", expected one of F16, BF16, F32, F64");
    const nlohmann::json& shape = v["shape"];
    if (!shape.is_array()) st_fail(source, at + ": shape = " + st_value(shape) + ", expected an array of sizes");
    for (std::size_t d = 0; d < shape.size(); ++d) {
      e.shape.push_back(detail::st_offset(shape[d], source, name + ".shape[" + std::to_string(d) + "]"));
    }
    const nlohmann::json& off = v["data_offsets"];
    if (!off.is_array() || off.size() != 2) {
      st_fail(source, at + ": data_offsets = " + st_value(off) + ", expected [begin, end]");
    }
    e.begin = detail::st_offset(off[0], source, name + ".data_offsets[0]");
    e.end = detail::st_offset(off[1], source, name + ".data_offsets[1]");
    const std::string range = "data_offsets [" + std::to_string(e.begin) + ", " + std::to_string(e.end) + "]";
    if (e.end < e.begin) st_fail(source, at + ": " + range + ", expected begin <= end");
    if (e.end > data_size) {
      st_fail(source, at + ": " + range + " runs past the data section's " + std::to_string(data_size) +
                          " bytes, expected end <= " + std::to_string(data_size));
    }
    std::uint64_t n = 0;
    if (!detail::st_count(e.shape, &n) || n > (e.end - e.begin) || n * element_kind_bytes(e.dtype) != e.end - e.begin) {
      st_fail(source, at + ": shape " + st_value(shape) + " of " + dt + " does not fill its " + range + " (" +
                          std::to_string(e.end - e.begin) + " bytes), expected " +
                          std::to_string(element_kind_bytes(e.dtype)) + " bytes an element");
    }
    index.tensors.push_back(std::move(e));
  }
  // The tensors must tile the data section: sorted by begin, each starts where the last ended.
  std::sort(index.tensors.begin(), index.tensors.end(),
            [](const safetensors_entry& a, const safetensors_entry& b) {
              return a.begin != b.begin ? a.begin < b.begin : a.end < b.end;
            });
  std::uint64_t at = 0;
  std::string previous = "the start of the data section";
  for (const safetensors_entry& e : index.tensors) {
    if (e.begin != at) {
      st_fail(source, "tensor '" + e.name + "': data_offsets begin " + std::to_string(e.begin) +
                          (e.begin < at ? " overlaps " : " leaves a gap after ") + previous + ", expected begin " +
                          std::to_string(at));
    }
    at = e.end;
    previous = "tensor '" + e.name + "' (ending at " + std::to_string(at) + ")";
  }
  if (at != data_size) {
    st_fail(source, "the tensors end at byte " + std::to_string(at) + " of the data section, but it holds " +
                        std::to_string(data_size) + " bytes, expected no trailing bytes");
  }
  return index;
}

/// A range of a file mapped read-only into memory (POSIX mmap), or nothing (false) when
/// the system refuses the mapping. Reading a tensor in place this way costs no copy, but
/// whether it is faster than read() into a reused buffer depends on the host: the
/// kernel's copy was a tenth of a whole-checkpoint audit's time on one, and reading
/// through the mapping made the audit twice as long on a virtual machine
/// (bench/RESULTS.md, 2026-12-04); `kindling audit` maps only tensors over 128 MiB. A
/// file truncated by another process while it is mapped makes a later access to the
/// lost pages raise SIGBUS; reads through read() report it instead.
class mapped_range {
 public:
  mapped_range() = default;
  mapped_range(int fd, std::uint64_t at, std::size_t size) {
    const auto page = static_cast<std::uint64_t>(::sysconf(_SC_PAGESIZE));
    if (size == 0 || page == 0) return;
    const std::uint64_t start = at - at % page;
    const std::size_t length = size + static_cast<std::size_t>(at - start);
    // Pages are mapped as they are first read, not all at once (MAP_POPULATE): a fault on
    // a file mapping maps its neighbours in the page cache too (the kernel's fault-around),
    // and that cost a whole-checkpoint audit less system time than populating every page
    // through the kernel's page walk (bench/RESULTS.md, 2026-12-04).
    void* base = ::mmap(nullptr, length, PROT_READ, MAP_PRIVATE, fd, static_cast<off_t>(start));
    if (base == MAP_FAILED) return;
    base_ = base;
    length_ = length;
    data_ = static_cast<const char*>(base) + (at - start);
  }
  ~mapped_range() {
    if (base_ != nullptr) ::munmap(base_, length_);
  }
  mapped_range(mapped_range&& o) noexcept : base_(o.base_), length_(o.length_), data_(o.data_) { o.base_ = nullptr; }
  mapped_range& operator=(mapped_range&& o) noexcept {
    std::swap(base_, o.base_);
    std::swap(length_, o.length_);
    std::swap(data_, o.data_);
    return *this;
  }
  mapped_range(const mapped_range&) = delete;
  mapped_range& operator=(const mapped_range&) = delete;

  explicit operator bool() const noexcept { return base_ != nullptr; }
  const char* data() const noexcept { return data_; }

 private:
  void* base_ = nullptr;
  std::size_t length_ = 0;
  const char* data_ = nullptr;
};

/// A safetensors file opened for reading: the header validated, tensors read by range.
class safetensors_reader {
 public:
  explicit safetensors_reader(const std::string& path, const std::string& what = "file") : path_(path) {
    source_ = what + " '" + path + "'";
    fd_ = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd_ < 0) detail::st_fail(source_, "cannot be opened (" + std::string(std::strerror(errno)) + ")");
    try {
      struct stat st {};
      if (::fstat(fd_, &st) != 0 || !S_ISREG(st.st_mode)) detail::st_fail(source_, "is not a regular file");
      const auto size = static_cast<std::uint64_t>(st.st_size);
      if (size < 8) {
        detail::st_fail(source_, "holds " + std::to_string(size) + " bytes, expected at least 8 (the header length)");
      }
      unsigned char head[8];
      read_at(0, reinterpret_cast<char*>(head), 8);
      std::uint64_t n = 0;
      for (int k = 7; k >= 0; --k) n = (n << 8) | head[k];
      if (n > safetensors_max_header) {
        detail::st_fail(source_, "header length " + std::to_string(n) + " bytes, expected at most " +
                                     std::to_string(safetensors_max_header) + " (100 MB)");
      }
      if (n > size - 8) {
        detail::st_fail(source_, "header length " + std::to_string(n) + " runs past the end of the file (" +
                                     std::to_string(size - 8) + " bytes after the length), expected at most " +
                                     std::to_string(size - 8));
      }
      std::string header(static_cast<std::size_t>(n), '\0');
      read_at(8, header.data(), header.size());
      index_ = parse_safetensors_header(header, size - 8 - n, source_);
      index_.data_start = 8 + n;
    } catch (...) {
      ::close(fd_);
      throw;
    }
  }
  ~safetensors_reader() { ::close(fd_); }
  safetensors_reader(const safetensors_reader&) = delete;
  safetensors_reader& operator=(const safetensors_reader&) = delete;

  const safetensors_index& index() const noexcept { return index_; }

  /// `size` bytes of tensor `e` from its byte `offset` on (within the tensor).
  void read(const safetensors_entry& e, std::uint64_t offset, char* out, std::size_t size) const {
    if (offset > e.end - e.begin || size > e.end - e.begin - offset) {
      throw std::out_of_range("safetensors " + source_ + ": read of " + std::to_string(size) + " bytes at " +
                              std::to_string(offset) + " outside tensor '" + e.name + "'");
    }
    read_at(index_.data_start + e.begin + offset, out, size);
  }

  /// Tensor `e`'s bytes mapped read-only in place (see mapped_range), or nothing when
  /// the file is no longer as long as when it was opened or the system refuses the
  /// mapping: then read() it.
  mapped_range map(const safetensors_entry& e) const {
    struct stat st {};
    if (::fstat(fd_, &st) != 0 || static_cast<std::uint64_t>(st.st_size) < index_.data_start + e.end) return {};
    return mapped_range(fd_, index_.data_start + e.begin, static_cast<std::size_t>(e.end - e.begin));
  }

 private:
  void read_at(std::uint64_t at, char* out, std::size_t size) const {
    std::uint64_t reached = at;
    if (!detail::read_exactly_at(fd_, at, out, size, &reached)) {
      detail::st_fail(source_, "cannot be read at byte " + std::to_string(reached) + " (file shrank?)");
    }
  }

  std::string path_, source_;
  int fd_ = -1;
  safetensors_index index_;
};

/// One tensor to write: its bytes come from fill(offset, buffer, size), which writes
/// `size` bytes of the tensor starting at byte `offset` (always whole elements, in
/// order, chunk by chunk, little-endian).
struct safetensors_source {
  std::string name;
  tensor_dtype dtype = tensor_dtype::f32;
  std::vector<std::uint64_t> shape;
  std::function<void(std::uint64_t offset, char* buffer, std::size_t size)> fill;
};

/// The bytes of a chunk the writer asks for at once (whole elements of any dtype).
inline constexpr std::size_t safetensors_chunk_bytes = std::size_t{1} << 20;

/// Writes `tensors` (in this order) and `metadata` to `path` through replace_file_streamed.
/// Names are checked first (non-empty, not "__metadata__", each once) and sizes must fit;
/// nothing is written on bad input. `what` names the output in messages.
inline void write_safetensors(const std::string& path, const std::vector<safetensors_source>& tensors,
                              const std::map<std::string, std::string>& metadata = {},
                              const std::string& what = "output") {
  nlohmann::json header = nlohmann::json::object();
  if (!metadata.empty()) header["__metadata__"] = metadata;
  std::set<std::string> seen;
  std::uint64_t at = 0;
  for (const safetensors_source& t : tensors) {
    if (t.name.empty() || t.name == "__metadata__") {
      throw std::invalid_argument("kindling::write_safetensors: tensor name '" + t.name +
                                  "', expected a non-empty name other than __metadata__");
    }
    if (!seen.insert(t.name).second) {
      throw std::invalid_argument("kindling::write_safetensors: tensor '" + t.name + "' is given twice, expected each name once");
    }
    std::uint64_t n = 0;
    if (!detail::st_count(t.shape, &n) || n > (~std::uint64_t{0} - at) / element_kind_bytes(t.dtype)) {
      throw std::length_error("kindling::write_safetensors: tensor '" + t.name + "' is too large for a 64-bit file");
    }
    const std::uint64_t bytes = n * element_kind_bytes(t.dtype);
    header[t.name] = {{"dtype", safetensors_dtype_name(t.dtype)}, {"shape", t.shape}, {"data_offsets", {at, at + bytes}}};
    at += bytes;
  }
  std::string text = header.dump();
  text.append((8 - text.size() % 8) % 8, ' ');  // keeps the data section 8-byte aligned
  replace_file_streamed(
      path,
      [&](file_sink& sink) {
        char length[8];
        for (int k = 0; k < 8; ++k) length[k] = static_cast<char>((static_cast<std::uint64_t>(text.size()) >> (8 * k)) & 0xff);
        sink.write(length, 8);
        sink.write(text.data(), text.size());
        std::vector<char> buffer(safetensors_chunk_bytes);
        for (const safetensors_source& t : tensors) {
          std::uint64_t n = 0;
          detail::st_count(t.shape, &n);
          const std::uint64_t total = n * element_kind_bytes(t.dtype);
          for (std::uint64_t off = 0; off < total;) {
            const auto size = static_cast<std::size_t>(std::min<std::uint64_t>(buffer.size(), total - off));
            t.fill(off, buffer.data(), size);
            sink.write(buffer.data(), size);
            off += size;
          }
        }
      },
      what);
}

}  // namespace kindling

#endif  // KINDLING_IO_SAFETENSORS_HPP
