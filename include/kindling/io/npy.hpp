// kindling/io/npy.hpp: a small, strict reader and writer of NumPy's .npy format
// (format versions 1.0 and 2.0, as documented in numpy/lib/format.py and NEP 1), for
// the element types kindling writes: little-endian binary16 '<f2', binary32 '<f4',
// binary64 '<f8', and bfloat16 as its 16-bit patterns.
//
// bfloat16 has no NumPy type. Its bit patterns are stored as unsigned 16-bit words in a
// one-field structured type, 'descr': [('bf16', '<u2')], so the fact is recorded in the
// header's dictionary and np.load still reads the file (NumPy refuses dictionaries with
// keys other than descr, fortran_order and shape, so a key of our own would not load).
// In Python: bits = np.load(f)['bf16']; x = (bits.astype(np.uint32) << 16).view(np.float32).
//
// Everything is validated before a value is used: magic, version, header length, the
// dictionary's syntax and keys, the type, the shape (and the overflow of its element
// count), fortran_order (only False: a Fortran-ordered file is refused with a message
// saying how to rewrite it) and that the data fills the rest of the file exactly.
// Errors are std::invalid_argument (malformed input) or std::length_error (sizes),
// naming the source, the field, its value and what was expected. read_npy reads no more
// than the header announces (read_file.hpp); write_npy writes an exclusive temporary
// file in the target's directory and renames it over the target (replace_file.hpp), so
// a failed run never replaces an existing file.
//
// parse_npy and encode_npy need only the standard library; read_npy and write_npy need
// POSIX. The data are encoded byte by byte, so the files are little-endian on any host.
#ifndef KINDLING_IO_NPY_HPP
#define KINDLING_IO_NPY_HPP

#include <cstdint>
#include <cstdio>
#include <cstring>
#include <fstream>
#include <limits>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <vector>

#include "../element.hpp"
#include "read_file.hpp"
#include "replace_file.hpp"

namespace kindling {

/// The element types of a .npy file kindling reads and writes (element.hpp's kinds).
using npy_type = element_kind;

/// "f16", "bf16", "f32" or "f64" (the tool's --dtype spellings).
inline const char* npy_type_name(npy_type t) noexcept { return element_kind_name(t); }

/// Bytes per element.
inline std::size_t npy_type_size(npy_type t) noexcept { return static_cast<std::size_t>(element_kind_bytes(t)); }

/// A tensor as stored in a .npy file: its shape (row-major), its element type and its
/// element data, little-endian, row-major.
struct npy_array {
  std::vector<std::uint64_t> shape;
  npy_type type = npy_type::f32;
  std::vector<unsigned char> bytes;

  /// The number of elements (1 for a 0-d array).
  std::uint64_t size() const noexcept {
    std::uint64_t n = 1;
    for (std::uint64_t e : shape) n *= e;
    return n;
  }
  /// Element i, exactly, as a double.
  double value(std::uint64_t i) const {
    const unsigned char* p = bytes.data() + i * npy_type_size(type);
    std::uint64_t w = 0;
    for (std::size_t b = npy_type_size(type); b-- > 0;) w = (w << 8) | p[b];
    switch (type) {
      case npy_type::f16: return static_cast<double>(to_float(float16{static_cast<std::uint16_t>(w)}));
      case npy_type::bf16: return static_cast<double>(to_float(bfloat16{static_cast<std::uint16_t>(w)}));
      case npy_type::f32: {
        const auto u = static_cast<std::uint32_t>(w);
        float f;
        std::memcpy(&f, &u, sizeof f);
        return static_cast<double>(f);
      }
      case npy_type::f64: {
        double d;
        std::memcpy(&d, &w, sizeof d);
        return d;
      }
    }
    return 0;
  }
  /// Every element, exactly, as doubles (row-major).
  std::vector<double> values() const {
    std::vector<double> out(static_cast<std::size_t>(size()));
    for (std::uint64_t i = 0; i < size(); ++i) out[static_cast<std::size_t>(i)] = value(i);
    return out;
  }
};

namespace detail {

// The .npy type of an element type, and an element's bits (IEEE 754 binary16, bfloat16,
// binary32 or binary64) as the file stores them, before the byte order.
template <class E>
constexpr npy_type npy_type_of() noexcept {
  static_assert(std::is_same<E, float16>::value || std::is_same<E, bfloat16>::value ||
                    std::is_same<E, float>::value || std::is_same<E, double>::value,
                "a .npy array holds float16, bfloat16, float or double");
  if constexpr (std::is_same<E, float16>::value) return npy_type::f16;
  if constexpr (std::is_same<E, bfloat16>::value) return npy_type::bf16;
  if constexpr (std::is_same<E, float>::value) return npy_type::f32;
  return npy_type::f64;
}

template <class E>
std::uint64_t npy_bits(E x) noexcept {
  if constexpr (std::is_same<E, float16>::value || std::is_same<E, bfloat16>::value) {
    return x.bits;
  } else {
    return bits_of(x);  // detail/dmath.hpp
  }
}

inline std::string npy_shape_text(const std::vector<std::uint64_t>& shape) {
  std::string s = "(";
  for (std::size_t i = 0; i < shape.size(); ++i) {
    s += std::to_string(shape[i]);
    if (shape.size() == 1 || i + 1 < shape.size()) s += shape.size() == 1 ? "," : ", ";
  }
  return s + ")";
}

[[noreturn]] inline void npy_fail(const std::string& source, const std::string& what) {
  throw std::invalid_argument("kindling::read_npy: " + source + ": " + what);
}

// A shown excerpt of untrusted text: printable ASCII only, at most 40 characters.
inline std::string npy_excerpt(const std::string& text, std::size_t at) {
  std::string out;
  for (std::size_t i = at; i < text.size() && out.size() < 40; ++i) {
    const char c = text[i];
    out += (c >= 0x20 && c < 0x7f) ? c : '?';
  }
  return "'" + out + "'";
}

// A parser of the Python literal NumPy writes as the header: a dict with string keys
// whose values are strings, True/False, tuples of non-negative integers, or (for
// descr) a list of (name, type) pairs. Nothing else is accepted.
class npy_header_parser {
 public:
  npy_header_parser(const std::string& text, const std::string& source) : t_(text), source_(source) {}

  struct header {
    std::string descr;
    std::string field;  // the field name of a one-field structured descr, else empty
    bool has_descr = false, has_order = false, has_shape = false;
    bool fortran_order = false;
    std::vector<std::uint64_t> shape;
  };

  header parse() {
    header h;
    skip();
    expect('{', "the header dictionary to start with '{'");
    skip();
    while (peek() != '}') {
      const std::string key = string_literal("a quoted key");
      skip();
      expect(':', "':' after key '" + key + "'");
      skip();
      if (key == "descr") {
        once(h.has_descr, key);
        if (peek() == '[') {
          descr_list(h);
        } else {
          h.descr = string_literal("a quoted type for 'descr'");
        }
      } else if (key == "fortran_order") {
        once(h.has_order, key);
        h.fortran_order = boolean();
      } else if (key == "shape") {
        once(h.has_shape, key);
        h.shape = int_tuple();
      } else {
        npy_fail(source_, "header key '" + key +
                              "' is not allowed; expected only 'descr', 'fortran_order' and 'shape'");
      }
      skip();
      if (peek() == ',') {
        ++i_;
        skip();
      } else if (peek() != '}') {
        fail_here("',' or '}' after the value of '" + key + "'");
      }
    }
    ++i_;
    while (i_ < t_.size() && t_[i_] == ' ') ++i_;
    if (i_ + 1 != t_.size() || t_[i_] != '\n') {
      fail_here("only spaces and a final newline after the header dictionary");
    }
    for (const auto& [present, name] : {std::pair<bool, const char*>{h.has_descr, "descr"},
                                        {h.has_order, "fortran_order"}, {h.has_shape, "shape"}}) {
      if (!present) npy_fail(source_, std::string("header has no key '") + name + "'; expected 'descr', 'fortran_order' and 'shape'");
    }
    return h;
  }

 private:
  char peek() const {
    if (i_ >= t_.size()) npy_fail(source_, "header ends inside the dictionary");
    return t_[i_];
  }
  void skip() {
    while (i_ < t_.size() && (t_[i_] == ' ' || t_[i_] == '\t')) ++i_;
  }
  [[noreturn]] void fail_here(const std::string& expected) const {
    npy_fail(source_, "header has " + (i_ < t_.size() ? npy_excerpt(t_, i_) : std::string("its end")) +
                          " at offset " + std::to_string(i_) + ", expected " + expected);
  }
  void expect(char c, const std::string& what) {
    if (peek() != c) fail_here(what);
    ++i_;
  }
  void once(bool& seen, const std::string& key) {
    if (seen) npy_fail(source_, "header has key '" + key + "' twice");
    seen = true;
  }
  std::string string_literal(const std::string& what) {
    const char q = peek();
    if (q != '\'' && q != '"') fail_here(what);
    const std::size_t start = ++i_;
    while (i_ < t_.size() && t_[i_] != q) {
      const auto c = static_cast<unsigned char>(t_[i_]);
      if (c == '\\' || c < 0x20 || c >= 0x7f) fail_here("a plain ASCII string without escapes");
      ++i_;
    }
    if (i_ >= t_.size()) npy_fail(source_, "header ends inside a string");
    return t_.substr(start, i_++ - start);
  }
  bool boolean() {
    if (t_.compare(i_, 4, "True") == 0) {
      i_ += 4;
      return true;
    }
    if (t_.compare(i_, 5, "False") == 0) {
      i_ += 5;
      return false;
    }
    fail_here("True or False for 'fortran_order'");
  }
  std::uint64_t integer() {
    if (peek() < '0' || peek() > '9') fail_here("a non-negative integer in 'shape'");
    std::uint64_t v = 0;
    while (i_ < t_.size() && t_[i_] >= '0' && t_[i_] <= '9') {
      const auto d = static_cast<std::uint64_t>(t_[i_] - '0');
      if (v > (std::numeric_limits<std::uint64_t>::max() - d) / 10) {
        throw std::length_error("kindling::read_npy: " + source_ + ": a size in 'shape' does not fit in 64 bits");
      }
      v = v * 10 + d;
      ++i_;
    }
    if (i_ < t_.size() && t_[i_] == 'L') ++i_;  // Python 2 long suffix, written by old NumPy
    return v;
  }
  std::vector<std::uint64_t> int_tuple() {
    expect('(', "a tuple '(...)' for 'shape'");
    std::vector<std::uint64_t> out;
    skip();
    bool comma = true;
    while (peek() != ')') {
      if (!comma) fail_here("',' between the sizes of 'shape'");
      out.push_back(integer());
      skip();
      comma = peek() == ',';
      if (comma) ++i_;
      skip();
    }
    if (out.size() == 1 && !comma) fail_here("',' after the only size, '(n,)', as Python writes a 1-tuple");
    ++i_;
    return out;
  }
  void descr_list(header& h) {
    expect('[', "'['");
    skip();
    expect('(', "a single (name, type) pair in 'descr'");
    skip();
    h.field = string_literal("a quoted field name");
    skip();
    expect(',', "',' in the (name, type) pair of 'descr'");
    skip();
    h.descr = string_literal("a quoted field type");
    skip();
    expect(')', "')' closing the single (name, type) pair of 'descr' (no sub-shape)");
    skip();
    if (peek() == ',') ++i_;
    skip();
    expect(']', "']' after the single field of 'descr'");
  }

  const std::string& t_;
  const std::string& source_;
  std::size_t i_ = 0;
};

inline npy_type npy_type_of(const npy_header_parser::header& h, const std::string& source) {
  if (!h.field.empty() || h.descr == "<u2") {
    if (h.field == "bf16" && h.descr == "<u2") return npy_type::bf16;
    npy_fail(source, "'descr' is " + (h.field.empty() ? "'" + h.descr + "'" : "[('" + h.field + "', '" + h.descr + "')]") +
                         ", expected '<f2', '<f4', '<f8' or [('bf16', '<u2')] (bfloat16 bit patterns)");
  }
  if (h.descr == "<f2") return npy_type::f16;
  if (h.descr == "<f4") return npy_type::f32;
  if (h.descr == "<f8") return npy_type::f64;
  const bool big = !h.descr.empty() && h.descr[0] == '>';
  npy_fail(source, "'descr' is '" + h.descr + "', expected '<f2', '<f4', '<f8' or [('bf16', '<u2')]" +
                       (big ? " (big-endian data: rewrite it little-endian, e.g. a.astype(a.dtype.newbyteorder('<')))" : ""));
}

inline std::uint32_t npy_le(const std::string& b, std::size_t at, std::size_t n) {
  std::uint32_t v = 0;
  for (std::size_t k = n; k-- > 0;) v = (v << 8) | static_cast<unsigned char>(b[at + k]);
  return v;
}

}  // namespace detail

namespace detail {

// What a .npy file's preamble and header say: the array without its data, where the
// data start and how many bytes they take. Everything before the data is validated.
struct npy_head {
  npy_array array;
  std::uint64_t data_at = 0;
  std::uint64_t data_bytes = 0;
};

inline npy_head npy_parse_head(const std::string& file, const std::string& source) {
  static const char magic[] = "\x93NUMPY";
  if (file.size() < 10 || file.compare(0, 6, magic, 6) != 0) {
    npy_fail(source, "does not start with the .npy magic string \\x93NUMPY (" + std::to_string(file.size()) +
                         " bytes), expected a NumPy .npy file");
  }
  const auto major = static_cast<unsigned char>(file[6]), minor = static_cast<unsigned char>(file[7]);
  if ((major != 1 && major != 2) || minor != 0) {
    npy_fail(source, "has format version " + std::to_string(major) + "." + std::to_string(minor) +
                         ", expected 1.0 or 2.0");
  }
  const std::size_t len_bytes = major == 1 ? 2 : 4;
  if (file.size() < 8 + len_bytes) npy_fail(source, "ends inside the header length field");
  const std::uint64_t header_len = npy_le(file, 8, len_bytes);
  npy_head h;
  h.data_at = 8 + len_bytes + header_len;
  if (h.data_at > file.size()) {
    throw std::length_error("kindling::read_npy: " + source + ": header length " + std::to_string(header_len) +
                            " runs past the end of the file (" + std::to_string(file.size()) + " bytes)");
  }
  const std::string text = file.substr(8 + len_bytes, static_cast<std::size_t>(header_len));
  const npy_header_parser::header parsed = npy_header_parser(text, source).parse();
  npy_array& a = h.array;
  a.type = npy_type_of(parsed, source);
  if (parsed.fortran_order) {
    npy_fail(source, "has fortran_order True, expected False (C order); rewrite it with "
                     "np.save(f, np.ascontiguousarray(a))");
  }
  a.shape = parsed.shape;
  std::uint64_t count = 1;
  for (std::uint64_t e : a.shape) {
    if (e != 0 && count > std::numeric_limits<std::uint64_t>::max() / e) {
      throw std::length_error("kindling::read_npy: " + source + ": shape " + npy_shape_text(a.shape) +
                              " has more elements than fit in 64 bits");
    }
    count *= e;
  }
  const std::uint64_t item = npy_type_size(a.type);
  h.data_bytes = count > std::numeric_limits<std::uint64_t>::max() / item ? std::numeric_limits<std::uint64_t>::max()
                                                                         : count * item;
  return h;
}

}  // namespace detail

/// Parses the bytes of a whole .npy file; `source` names it in error messages.
inline npy_array parse_npy(const std::string& file, const std::string& source = "npy data") {
  detail::npy_head h = detail::npy_parse_head(file, source);
  const std::uint64_t have = file.size() - h.data_at;
  if (h.data_bytes != have) {
    throw std::length_error("kindling::read_npy: " + source + ": shape " + detail::npy_shape_text(h.array.shape) +
                            " of " + npy_type_name(h.array.type) + " needs " +
                            (h.data_bytes == std::numeric_limits<std::uint64_t>::max()
                                 ? std::string("more than 2^64")
                                 : std::to_string(h.data_bytes)) +
                            " data bytes, the file holds " + std::to_string(have));
  }
  h.array.bytes.assign(file.begin() + static_cast<std::ptrdiff_t>(h.data_at), file.end());
  return std::move(h.array);
}

/// The longest header read_npy accepts: NumPy writes a few hundred bytes at most for
/// any shape kindling handles, so a longer one is not worth holding in memory.
inline constexpr std::uint64_t npy_max_header_bytes = 65536;

/// Reads a .npy file of at most `max_elements` elements. Nothing is read beyond what
/// the file may need: the preamble, a header of at most npy_max_header_bytes, then
/// exactly the data the header announces (a longer file is refused), so a device, a
/// FIFO or a huge file costs no more memory than a legitimate one. `what` names the
/// file in the open/read errors (e.g. "FILE").
inline npy_array read_npy(const std::string& path, std::uint64_t max_elements = std::uint64_t{1} << 32,
                          const std::string& what = "kindling::read_npy: file") {
  const std::string source = "'" + path + "'";
  bounded_reader in(path, what);
  std::string file;
  in.read_up_to(file, 12);  // magic, version and the header length of either version
  if (file.size() >= 12 && file.compare(0, 6, "\x93NUMPY", 6) == 0 && (file[6] == 1 || file[6] == 2)) {
    const std::size_t len_bytes = file[6] == 1 ? 2 : 4;
    const std::uint64_t header_len = detail::npy_le(file, 8, len_bytes);
    if (header_len > npy_max_header_bytes) {
      throw std::length_error("kindling::read_npy: " + source + ": header length " + std::to_string(header_len) +
                              ", expected at most " + std::to_string(npy_max_header_bytes) + " bytes");
    }
    const std::uint64_t data_at = 8 + len_bytes + header_len;
    if (data_at > file.size()) in.read_up_to(file, data_at - file.size());
  }
  const detail::npy_head h = detail::npy_parse_head(file, source);
  const std::uint64_t item = npy_type_size(h.array.type);
  if (h.data_bytes / item > max_elements) {
    throw std::length_error("kindling::read_npy: " + source + ": shape " + detail::npy_shape_text(h.array.shape) +
                            " has " + std::to_string(h.data_bytes / item) + " elements, expected at most " +
                            std::to_string(max_elements));
  }
  const std::uint64_t have = file.size() - h.data_at;
  if (have > h.data_bytes || !in.read_up_to(file, h.data_bytes - have)) {
    throw std::length_error("kindling::read_npy: " + source + ": shape " + detail::npy_shape_text(h.array.shape) +
                            " of " + npy_type_name(h.array.type) + " needs " + std::to_string(h.data_bytes) +
                            " data bytes, the file holds more");
  }
  return parse_npy(file, source);
}

/// The preamble and header of a .npy file holding `shape` of `type` (the data follow):
/// version 1.0 when the header fits its 16-bit length, else 2.0; padded with spaces to a
/// multiple of 64 bytes, as NumPy does, so the data are aligned.
inline std::string encode_npy_header(npy_type type, const std::vector<std::uint64_t>& shape) {
  const char* descr = type == npy_type::f16 ? "'<f2'" : type == npy_type::f32 ? "'<f4'"
                      : type == npy_type::f64 ? "'<f8'" : "[('bf16', '<u2')]";
  std::string dict = std::string("{'descr': ") + descr + ", 'fortran_order': False, 'shape': " +
                     detail::npy_shape_text(shape) + ", }";
  int major = 1;
  std::size_t prefix = 10;
  if (dict.size() + 1 + 64 > 65535) {
    major = 2;
    prefix = 12;
  }
  const std::size_t pad = (64 - (prefix + dict.size() + 1) % 64) % 64;
  dict.append(pad, ' ');
  dict += '\n';
  std::string out("\x93NUMPY", 6);
  out += static_cast<char>(major);
  out += '\0';
  const auto n = static_cast<std::uint32_t>(dict.size());
  for (std::size_t k = 0; k < prefix - 8; ++k) out += static_cast<char>((n >> (8 * k)) & 0xffu);
  out += dict;
  return out;
}

/// The bytes of a .npy file holding `a` (encode_npy_header, then the data).
inline std::string encode_npy(const npy_array& a) {
  std::uint64_t count = 1;
  for (std::uint64_t e : a.shape) {
    if (e != 0 && count > std::numeric_limits<std::uint64_t>::max() / e) {
      throw std::length_error("kindling::encode_npy: argument 'a.shape' = " + detail::npy_shape_text(a.shape) +
                              " has more elements than fit in 64 bits");
    }
    count *= e;
  }
  if (count > std::numeric_limits<std::uint64_t>::max() / 8 || a.bytes.size() != count * npy_type_size(a.type)) {
    throw std::length_error("kindling::encode_npy: argument 'a.bytes' holds " + std::to_string(a.bytes.size()) +
                            " bytes, expected " + std::to_string(count) + " elements of " + npy_type_name(a.type));
  }
  std::string out = encode_npy_header(a.type, a.shape);
  out.append(reinterpret_cast<const char*>(a.bytes.data()), a.bytes.size());
  return out;
}

/// An npy_array of `values` (row-major, of `shape`); E is float16, bfloat16, float or double.
template <class E>
npy_array make_npy(std::vector<std::uint64_t> shape, const std::vector<E>& values) {
  npy_array a;
  a.shape = std::move(shape);
  a.type = detail::npy_type_of<E>();
  if (a.size() != values.size()) {
    throw std::length_error("kindling::make_npy: argument 'values' has " + std::to_string(values.size()) +
                            " elements, expected " + std::to_string(a.size()) + " for shape " +
                            detail::npy_shape_text(a.shape));
  }
  const std::size_t item = npy_type_size(a.type);
  a.bytes.resize(values.size() * item);
  for (std::size_t i = 0; i < values.size(); ++i) {
    const std::uint64_t b = detail::npy_bits(values[i]);
    for (std::size_t k = 0; k < item; ++k) a.bytes[i * item + k] = static_cast<unsigned char>((b >> (8 * k)) & 0xffu);
  }
  return a;
}

/// Writes `bytes` to `path` safely: an exclusive temporary file beside the target, then
/// an atomic rename (kindling/io/replace_file.hpp), so the file at `path` is either the
/// complete new content or left as it was.
inline void write_file_replacing(const std::string& path, const std::string& bytes) { replace_file(path, bytes); }

/// Writes `a` as a .npy file (temporary file, then rename).
inline void write_npy(const std::string& path, const npy_array& a) { write_file_replacing(path, encode_npy(a)); }

}  // namespace kindling

#endif  // KINDLING_IO_NPY_HPP
