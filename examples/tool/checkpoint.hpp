// examples/tool/checkpoint.hpp: what assemble, verify and audit share: a checkpoint file
// read the same way whether it is safetensors or .npz (told apart by its first bytes),
// and the progress line on stderr.
#ifndef KINDLING_TOOL_CHECKPOINT_HPP
#define KINDLING_TOOL_CHECKPOINT_HPP

#include <chrono>
#include <cstdint>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include <kindling/element.hpp>

namespace kindling {
class safetensors_reader;
class npz_reader;
}  // namespace kindling

namespace kindling::tool {

/// A multi-tensor checkpoint opened for reading: an .npz file (a zip archive, "PK") or
/// a safetensors file (anything else), validated whole on opening.
class checkpoint {
 public:
  struct tensor {
    std::string name;
    element_kind dtype = element_kind::f32;
    std::vector<std::uint64_t> shape;
    std::uint64_t bytes = 0;
  };

  checkpoint(const std::string& path, const std::string& what);
  ~checkpoint();
  checkpoint(const checkpoint&) = delete;
  checkpoint& operator=(const checkpoint&) = delete;

  const char* format() const { return npz_ ? "npz" : "safetensors"; }
  const std::vector<tensor>& tensors() const { return tensors_; }
  const tensor* find(const std::string& name) const;
  /// Streams tensor t's little-endian bytes to consume(data, size) in order (safe to
  /// call from several threads at once).
  void read(const tensor& t, const std::function<void(const char*, std::size_t)>& consume) const;
  /// Reads tensor t's t.bytes little-endian bytes, whole, into `out` (safe to call from
  /// several threads at once). A safetensors tensor goes from the file straight into
  /// `out`, with no staging buffer; an .npz member through its checked stream.
  void read_into(const tensor& t, char* out) const;
  /// Tensor t's little-endian bytes mapped read-only in place (no copy), kept mapped as
  /// long as the pointer lives; null for an .npz member or when the system refuses the
  /// mapping (then use read_into). Safe to call from several threads at once.
  std::shared_ptr<const char> map(const tensor& t) const;

 private:
  std::unique_ptr<safetensors_reader> st_;
  std::unique_ptr<npz_reader> npz_;
  std::vector<tensor> tensors_;
};

/// A one-line progress report on stderr, redrawn in place at most ten times a second,
/// and only when stderr is a terminal (so logs and pipes get nothing).
class progress_line {
 public:
  explicit progress_line(std::string command);
  ~progress_line();
  bool active() const { return active_; }
  void show(const std::string& text, bool force = false);
  void clear();

 private:
  std::string command_;
  bool active_ = false, shown_ = false;
  std::chrono::steady_clock::time_point last_{};
};

}  // namespace kindling::tool

#endif  // KINDLING_TOOL_CHECKPOINT_HPP
