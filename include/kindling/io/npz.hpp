// kindling/io/npz.hpp: NumPy's .npz files (np.savez, np.savez_compressed): a zip archive
// whose members are .npy files (io/npy.hpp), one per named array, "NAME.npy".
//
// The zip structures follow PKWARE's published APPNOTE.TXT (the .ZIP File Format
// Specification, version 6.3.x), sections 4.3 and 4.4:
//   local file header   (4.3.7)  signature 0x04034b50, 30 bytes + name + extra
//   file data                    stored (method 0) or raw deflate (method 8, RFC 1951)
//   data descriptor     (4.3.9)  signature 0x08074b50, CRC-32, compressed and
//                                uncompressed sizes (8 bytes each for zip64)
//   central directory   (4.3.12) signature 0x02014b50, one header per member
//   zip64 end record    (4.3.14) signature 0x06064b50, and its locator (4.3.15) 0x07064b50
//   end record          (4.3.16) signature 0x06054b50
//   zip64 extra field   (4.5.3)  id 0x0001: the sizes and offset that do not fit 32 bits
// CRC-32 is the one of APPNOTE 4.4.7 (the ISO 3309 / ITU-T V.42 polynomial), computed by
// zlib's crc32(); deflate and inflate are zlib's (raw streams, windowBits -15).
//
// Writing (write_npz) is streamed like write_safetensors: each member's bytes come from a
// callback chunk by chunk and go through the CRC (and deflate) straight to the file, so
// every member's local header has general purpose bit 3 set and its CRC and sizes follow
// the data in a data descriptor. Zip64 fields are written only where a size, an offset
// or the number of members needs them. The output is deterministic: every timestamp is
// 1980-01-01 00:00 (the earliest MS-DOS date), so the same arrays give the same bytes.
// The file goes through replace_file_streamed (io/replace_file.hpp): nothing is replaced
// on failure.
//
// Reading (npz_reader) validates the whole archive before any value is used: the end
// record (and zip64 end record), a central directory within the file and exactly filling
// its declared size, for every member its local header, name, method (stored or
// deflated; no encryption), a data range inside the file that overlaps no other member,
// a name ending in ".npy", and the .npy header at the start of its data (dtype, shape)
// agreeing with the member's uncompressed size. Reading a member streams and inflates
// it; at the end its CRC-32 and sizes must match (a zip that lies about its sizes is an
// error, never a short or long array). Errors are std::invalid_argument naming the file,
// the member and what was expected.
//
// Needs zlib (Debian zlib1g-dev; CMake: the kindling::npz target, or link ZLIB::ZLIB)
// and POSIX; kindling's core does not include it. The sources hand the writer
// little-endian bytes, as write_safetensors's do, and every zip field is written byte by
// byte, so any host writes the same file.
#ifndef KINDLING_IO_NPZ_HPP
#define KINDLING_IO_NPZ_HPP

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
#include <sys/stat.h>
#include <unistd.h>
#include <zlib.h>

#include "npy.hpp"
#include "replace_file.hpp"
#include "safetensors.hpp"

namespace kindling {

/// One array to write: as for write_safetensors, fill(offset, buffer, size) writes
/// `size` bytes of the array's little-endian data starting at byte `offset`.
using npz_source = safetensors_source;

struct npz_options {
  bool compress = false;        // deflate every member (np.savez_compressed), else store (np.savez)
  int level = 6;                // zlib level 1 (fastest) to 9 when compressing; 6 is zlib's and NumPy's default
  bool force_zip64 = false;     // zip64 fields for every member and the end record (tests)
};

/// The largest central directory read (about 100 bytes a member).
inline constexpr std::uint64_t npz_max_directory = 100000000;

namespace detail {

constexpr std::uint32_t zip_local_signature = 0x04034b50;
constexpr std::uint32_t zip_descriptor_signature = 0x08074b50;
constexpr std::uint32_t zip_central_signature = 0x02014b50;
constexpr std::uint32_t zip64_end_signature = 0x06064b50;
constexpr std::uint32_t zip64_locator_signature = 0x07064b50;
constexpr std::uint32_t zip_end_signature = 0x06054b50;
constexpr std::uint32_t zip_max32 = 0xffffffffu;
constexpr std::uint16_t zip_dos_date = 0x0021;  // 1980-01-01: day 1, month 1, year 0 (APPNOTE 4.4.6)

inline void put16(std::string& out, std::uint64_t v) {
  for (int k = 0; k < 2; ++k) out += static_cast<char>((v >> (8 * k)) & 0xffu);
}
inline void put32(std::string& out, std::uint64_t v) {
  for (int k = 0; k < 4; ++k) out += static_cast<char>((v >> (8 * k)) & 0xffu);
}
inline void put64(std::string& out, std::uint64_t v) {
  for (int k = 0; k < 8; ++k) out += static_cast<char>((v >> (8 * k)) & 0xffu);
}
inline std::uint64_t get_le(const char* p, int bytes) {
  std::uint64_t v = 0;
  for (int k = bytes; k-- > 0;) v = (v << 8) | static_cast<unsigned char>(p[k]);
  return v;
}

// The CRC-32 of APPNOTE 4.4.7 over any number of bytes (zlib takes at most 2^32 - 1 at once).
inline std::uint32_t crc32_update(std::uint32_t crc, const char* data, std::size_t size) {
  uLong c = crc;
  while (size > 0) {
    const auto n = static_cast<uInt>(std::min<std::size_t>(size, std::size_t{1} << 30));
    c = ::crc32(c, reinterpret_cast<const Bytef*>(data), n);
    data += n;
    size -= n;
  }
  return static_cast<std::uint32_t>(c);
}

// One member as written: what its central directory header needs.
struct zip_written {
  std::string name;
  std::uint64_t offset = 0, compressed = 0, uncompressed = 0;
  std::uint32_t crc = 0;
  bool zip64 = false;  // its local header and data descriptor carry 64-bit sizes
  bool deflated = false;
};

inline bool zip_utf8(const std::string& name) {
  for (char c : name) {
    if (static_cast<unsigned char>(c) >= 0x80) return true;
  }
  return false;
}

// Streams a member's uncompressed bytes through the CRC and, when compressing, deflate.
class zip_member_writer {
 public:
  zip_member_writer(file_sink& sink, bool deflate, int level) : sink_(sink), deflate_(deflate) {
    if (deflate_) {
      std::memset(&z_, 0, sizeof z_);
      if (deflateInit2(&z_, level, Z_DEFLATED, -15, 8, Z_DEFAULT_STRATEGY) != Z_OK) {
        throw std::runtime_error("kindling::write_npz: zlib's deflateInit2 failed (level " + std::to_string(level) + ")");
      }
      out_.resize(std::size_t{1} << 20);
    }
  }
  ~zip_member_writer() {
    if (deflate_) deflateEnd(&z_);
  }
  zip_member_writer(const zip_member_writer&) = delete;
  zip_member_writer& operator=(const zip_member_writer&) = delete;

  void write(const char* data, std::size_t size) {
    crc_ = crc32_update(crc_, data, size);
    uncompressed_ += size;
    if (!deflate_) {
      sink_.write(data, size);
      compressed_ += size;
      return;
    }
    while (size > 0) {
      const auto n = static_cast<uInt>(std::min<std::size_t>(size, std::size_t{1} << 30));
      z_.next_in = reinterpret_cast<Bytef*>(const_cast<char*>(data));
      z_.avail_in = n;
      run(Z_NO_FLUSH);
      data += n;
      size -= n;
    }
  }
  void finish() {
    if (deflate_) {
      z_.next_in = nullptr;
      z_.avail_in = 0;
      run(Z_FINISH);
    }
  }
  std::uint32_t crc() const { return crc_; }
  std::uint64_t compressed() const { return compressed_; }
  std::uint64_t uncompressed() const { return uncompressed_; }

 private:
  void run(int flush) {
    for (;;) {
      z_.next_out = reinterpret_cast<Bytef*>(out_.data());
      z_.avail_out = static_cast<uInt>(out_.size());
      const int rc = deflate(&z_, flush);
      if (rc == Z_STREAM_ERROR) throw std::runtime_error("kindling::write_npz: zlib's deflate failed");
      const std::size_t have = out_.size() - z_.avail_out;
      sink_.write(out_.data(), have);
      compressed_ += have;
      if (flush == Z_FINISH ? rc == Z_STREAM_END : (z_.avail_in == 0 && z_.avail_out != 0)) return;
    }
  }

  file_sink& sink_;
  bool deflate_;
  z_stream z_{};
  std::vector<char> out_;
  std::uint32_t crc_ = 0;
  std::uint64_t compressed_ = 0, uncompressed_ = 0;
};

}  // namespace detail

/// Writes `arrays` (in this order) as members "NAME.npy" of an .npz file at `path`
/// (see the top of this header). Names are checked first (non-empty, each once) and
/// nothing is written on bad input. `what` names the output in messages.
inline void write_npz(const std::string& path, const std::vector<npz_source>& arrays, const npz_options& options = {},
                      const std::string& what = "output") {
  using namespace detail;
  if (options.compress && (options.level < 1 || options.level > 9)) {
    throw std::invalid_argument("kindling::write_npz: argument 'options.level' = " + std::to_string(options.level) +
                                ", expected a zlib level from 1 to 9");
  }
  std::set<std::string> seen;
  std::vector<std::uint64_t> data_bytes;
  for (const npz_source& a : arrays) {
    if (a.name.empty()) throw std::invalid_argument("kindling::write_npz: an array has an empty name, expected a name");
    if (!seen.insert(a.name).second) {
      throw std::invalid_argument("kindling::write_npz: array '" + a.name + "' is given twice, expected each name once");
    }
    if (a.name.size() + 4 > 0xffff) {
      throw std::invalid_argument("kindling::write_npz: array name of " + std::to_string(a.name.size()) +
                                  " bytes, expected at most 65531 (a zip name holds 65535)");
    }
    std::uint64_t n = 0;
    if (!st_count(a.shape, &n) || n > (~std::uint64_t{0} >> 4) / element_kind_bytes(a.dtype)) {
      throw std::length_error("kindling::write_npz: array '" + a.name + "' is too large for a 64-bit file");
    }
    data_bytes.push_back(n * element_kind_bytes(a.dtype));
  }
  replace_file_streamed(
      path,
      [&](file_sink& sink) {
        std::vector<zip_written> members;
        std::vector<char> buffer(safetensors_chunk_bytes);
        for (std::size_t i = 0; i < arrays.size(); ++i) {
          const npz_source& a = arrays[i];
          const std::string header = encode_npy_header(a.dtype, a.shape);
          zip_written m;
          m.name = a.name + ".npy";
          m.offset = sink.written();
          m.deflated = options.compress;
          // Deflate may grow incompressible data a little (5 bytes a 16 KiB block, zlib's
          // deflateBound); a member within 1/1000 of 4 GiB gets 64-bit sizes to be safe.
          const std::uint64_t raw = header.size() + data_bytes[i];
          m.zip64 = options.force_zip64 || raw + raw / 1000 + 1024 >= zip_max32;
          std::string local;
          put32(local, zip_local_signature);
          put16(local, m.zip64 ? 45 : 20);  // version needed: 4.5 for zip64, 2.0 for deflate
          put16(local, 0x0008 | (zip_utf8(m.name) ? 0x0800 : 0));  // bit 3: sizes in the data descriptor
          put16(local, m.deflated ? 8 : 0);
          put16(local, 0);  // time 00:00:00
          put16(local, zip_dos_date);
          put32(local, 0);  // CRC-32: in the data descriptor
          put32(local, m.zip64 ? zip_max32 : 0);
          put32(local, m.zip64 ? zip_max32 : 0);
          put16(local, m.name.size());
          put16(local, m.zip64 ? 20 : 0);
          local += m.name;
          if (m.zip64) {  // 4.5.3: the local header's zip64 field holds both sizes (zero here)
            put16(local, 0x0001);
            put16(local, 16);
            put64(local, 0);
            put64(local, 0);
          }
          sink.write(local.data(), local.size());
          zip_member_writer body(sink, options.compress, options.level);
          body.write(header.data(), header.size());
          for (std::uint64_t off = 0; off < data_bytes[i];) {
            const auto size = static_cast<std::size_t>(std::min<std::uint64_t>(buffer.size(), data_bytes[i] - off));
            a.fill(off, buffer.data(), size);
            body.write(buffer.data(), size);
            off += size;
          }
          body.finish();
          m.crc = body.crc();
          m.compressed = body.compressed();
          m.uncompressed = body.uncompressed();
          if (!m.zip64 && (m.compressed >= zip_max32 || m.uncompressed >= zip_max32)) {
            throw std::length_error("kindling::write_npz: member '" + m.name + "' grew past 4 GiB when deflated");
          }
          std::string descriptor;
          put32(descriptor, zip_descriptor_signature);
          put32(descriptor, m.crc);
          if (m.zip64) {
            put64(descriptor, m.compressed);
            put64(descriptor, m.uncompressed);
          } else {
            put32(descriptor, m.compressed);
            put32(descriptor, m.uncompressed);
          }
          sink.write(descriptor.data(), descriptor.size());
          members.push_back(std::move(m));
        }
        const std::uint64_t directory_at = sink.written();
        std::string directory;
        for (const zip_written& m : members) {
          const bool big_u = options.force_zip64 || m.uncompressed >= zip_max32;
          const bool big_c = options.force_zip64 || m.compressed >= zip_max32;
          const bool big_o = options.force_zip64 || m.offset >= zip_max32;
          std::string extra;
          if (big_u || big_c || big_o) {  // 4.5.3: only the fields that overflow, in this order
            std::string fields;
            if (big_u) put64(fields, m.uncompressed);
            if (big_c) put64(fields, m.compressed);
            if (big_o) put64(fields, m.offset);
            put16(extra, 0x0001);
            put16(extra, fields.size());
            extra += fields;
          }
          const bool zip64 = m.zip64 || !extra.empty();
          put32(directory, zip_central_signature);
          put16(directory, (3 << 8) | 45);  // made by: UNIX (3), APPNOTE 4.5
          put16(directory, zip64 ? 45 : 20);
          put16(directory, 0x0008 | (zip_utf8(m.name) ? 0x0800 : 0));
          put16(directory, m.deflated ? 8 : 0);
          put16(directory, 0);
          put16(directory, zip_dos_date);
          put32(directory, m.crc);
          put32(directory, big_c ? zip_max32 : m.compressed);
          put32(directory, big_u ? zip_max32 : m.uncompressed);
          put16(directory, m.name.size());
          put16(directory, extra.size());
          put16(directory, 0);  // comment
          put16(directory, 0);  // disk number start
          put16(directory, 0);  // internal attributes
          put32(directory, std::uint64_t{0100644} << 16);  // external: a regular file, rw-r--r--
          put32(directory, big_o ? zip_max32 : m.offset);
          directory += m.name;
          directory += extra;
          if (directory.size() >= safetensors_chunk_bytes) {
            sink.write(directory.data(), directory.size());
            directory.clear();
          }
        }
        sink.write(directory.data(), directory.size());
        const std::uint64_t end_at = sink.written();
        const std::uint64_t directory_size = end_at - directory_at;
        const std::uint64_t count = members.size();
        const bool zip64_end = options.force_zip64 || count >= 0xffff || directory_size >= zip_max32 ||
                               directory_at >= zip_max32;
        std::string end;
        if (zip64_end) {
          put32(end, zip64_end_signature);
          put64(end, 44);  // the record's size after this field (4.3.14.1)
          put16(end, (3 << 8) | 45);
          put16(end, 45);
          put32(end, 0);
          put32(end, 0);
          put64(end, count);
          put64(end, count);
          put64(end, directory_size);
          put64(end, directory_at);
          put32(end, zip64_locator_signature);
          put32(end, 0);
          put64(end, end_at);
          put32(end, 1);  // total number of disks
        }
        put32(end, zip_end_signature);
        put16(end, 0);
        put16(end, 0);
        put16(end, zip64_end ? 0xffff : count);
        put16(end, zip64_end ? 0xffff : count);
        put32(end, zip64_end ? zip_max32 : directory_size);
        put32(end, zip64_end ? zip_max32 : directory_at);
        put16(end, 0);  // comment length
        sink.write(end.data(), end.size());
      },
      what);
}

/// Writes `arrays` given as npy_arrays (in memory) under their names.
inline void write_npz(const std::string& path, const std::vector<std::pair<std::string, npy_array>>& arrays,
                      const npz_options& options = {}, const std::string& what = "output") {
  std::vector<npz_source> sources;
  for (const auto& [name, a] : arrays) {
    const npy_array* p = &a;
    sources.push_back({name, a.type, a.shape, [p](std::uint64_t offset, char* out, std::size_t size) {
                         std::memcpy(out, p->bytes.data() + offset, size);
                       }});
    if (a.bytes.size() != a.size() * npy_type_size(a.type)) {
      throw std::length_error("kindling::write_npz: array '" + name + "' holds " + std::to_string(a.bytes.size()) +
                              " bytes, expected " + std::to_string(a.size() * npy_type_size(a.type)));
    }
  }
  write_npz(path, sources, options, what);
}

/// One array of an .npz file, as its central directory and .npy header describe it.
struct npz_entry {
  std::string name;                   // the member's name without ".npy" (np.load's key)
  npy_type dtype = npy_type::f32;
  std::vector<std::uint64_t> shape;
  std::uint64_t data_bytes = 0;       // the array's data (after the .npy header)
  // Where the member is: its data in the file, how it is stored, what it must hold.
  bool deflated = false;
  std::uint64_t data_at = 0, compressed = 0, uncompressed = 0, header_bytes = 0;
  std::uint32_t crc = 0;
};

/// An .npz file opened for reading: every member validated (see the top of this header).
class npz_reader {
 public:
  explicit npz_reader(const std::string& path, const std::string& what = "file") {
    source_ = what + " '" + path + "'";
    fd_ = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
    if (fd_ < 0) fail("cannot be opened (" + std::string(std::strerror(errno)) + ")");
    try {
      struct stat st {};
      if (::fstat(fd_, &st) != 0 || !S_ISREG(st.st_mode)) fail("is not a regular file");
      size_ = static_cast<std::uint64_t>(st.st_size);
      open_directory();
    } catch (...) {
      ::close(fd_);
      throw;
    }
  }
  ~npz_reader() { ::close(fd_); }
  npz_reader(const npz_reader&) = delete;
  npz_reader& operator=(const npz_reader&) = delete;

  /// The arrays in the order of the central directory.
  const std::vector<npz_entry>& entries() const noexcept { return entries_; }
  const npz_entry* find(const std::string& name) const {
    for (const npz_entry& e : entries_) {
      if (e.name == name) return &e;
    }
    return nullptr;
  }

  /// Streams the data bytes of array `e` (after its .npy header) to consume(data, size),
  /// in order, in chunks; checks the member's sizes and CRC-32 at its end.
  void read(const npz_entry& e, const std::function<void(const char*, std::size_t)>& consume) const {
    std::uint64_t skip = e.header_bytes;
    stream(e, e.uncompressed, [&](const char* data, std::size_t size) {
      if (skip >= size) {
        skip -= size;
        return;
      }
      consume(data + skip, size - static_cast<std::size_t>(skip));
      skip = 0;
    });
  }

  /// The whole array `e` in memory.
  npy_array array(const npz_entry& e) const {
    npy_array a;
    a.type = e.dtype;
    a.shape = e.shape;
    a.bytes.reserve(static_cast<std::size_t>(e.data_bytes));
    read(e, [&](const char* data, std::size_t size) { a.bytes.insert(a.bytes.end(), data, data + size); });
    return a;
  }

 private:
  [[noreturn]] void fail(const std::string& why) const { throw std::invalid_argument("npz " + source_ + ": " + why); }
  [[noreturn]] void fail_member(const std::string& member, const std::string& why) const {
    fail("member '" + member + "' " + why);
  }

  void read_at(std::uint64_t at, char* out, std::size_t size) const {
    if (at > size_ || size > size_ - at) {
      fail("needs bytes [" + std::to_string(at) + ", " + std::to_string(at + size) + ") beyond its " +
           std::to_string(size_) + " bytes (truncated?)");
    }
    std::uint64_t reached = at;
    if (!detail::read_exactly_at(fd_, at, out, size, &reached)) {
      fail("cannot be read at byte " + std::to_string(reached) + " (file shrank?)");
    }
  }

  // Streams the first `limit` uncompressed bytes of member e (all of them when limit is
  // e.uncompressed, then checking the CRC and that the data end exactly there).
  void stream(const npz_entry& e, std::uint64_t limit, const std::function<void(const char*, std::size_t)>& consume) const {
    const std::string& name = e.name;
    const bool whole = limit == e.uncompressed;
    // Buffers of at most 1 MiB, and no larger than the member needs (headers are small).
    const std::uint64_t span = e.deflated ? e.compressed : limit;
    std::vector<char> in(static_cast<std::size_t>(std::max<std::uint64_t>(1, std::min<std::uint64_t>(span, 1 << 20))));
    std::uint32_t crc = 0;
    std::uint64_t produced = 0;
    if (!e.deflated) {
      for (std::uint64_t off = 0; off < limit;) {
        const auto n = static_cast<std::size_t>(std::min<std::uint64_t>(in.size(), limit - off));
        read_at(e.data_at + off, in.data(), n);
        crc = detail::crc32_update(crc, in.data(), n);
        consume(in.data(), n);
        off += n;
      }
      produced = limit;
    } else {
      z_stream z{};
      if (inflateInit2(&z, -15) != Z_OK) fail("zlib's inflateInit2 failed");
      std::vector<char> out(static_cast<std::size_t>(std::min<std::uint64_t>(limit + 1, 1 << 20)));
      std::uint64_t taken = 0;
      bool ended = false;
      try {
        while (!ended) {
          if (z.avail_in == 0 && taken < e.compressed) {
            const auto n = static_cast<std::size_t>(std::min<std::uint64_t>(in.size(), e.compressed - taken));
            read_at(e.data_at + taken, in.data(), n);
            taken += n;
            z.next_in = reinterpret_cast<Bytef*>(in.data());
            z.avail_in = static_cast<uInt>(n);
          }
          // Room for one byte more than declared when reading it whole, to catch a liar.
          const std::uint64_t room = limit - produced + (whole ? 1 : 0);
          if (room == 0) break;
          z.next_out = reinterpret_cast<Bytef*>(out.data());
          z.avail_out = static_cast<uInt>(std::min<std::uint64_t>(out.size(), room));
          const uInt before = z.avail_out;
          const int rc = inflate(&z, Z_NO_FLUSH);
          const std::size_t have = before - z.avail_out;
          if (produced + have > limit) {
            fail_member(name + ".npy", "inflates to more than its declared " + std::to_string(e.uncompressed) +
                                           " bytes: the zip lies about its sizes");
          }
          crc = detail::crc32_update(crc, out.data(), have);
          if (have > 0) consume(out.data(), have);
          produced += have;
          if (rc == Z_STREAM_END) {
            ended = true;
          } else if (rc == Z_BUF_ERROR && z.avail_in == 0 && taken == e.compressed) {
            fail_member(name + ".npy", "ends inside its deflate stream after its declared " + std::to_string(e.compressed) +
                                           " compressed bytes: the zip lies about its sizes (or is truncated)");
          } else if (rc != Z_OK && rc != Z_BUF_ERROR) {
            fail_member(name + ".npy", "is not a valid deflate stream (zlib: " + std::string(z.msg ? z.msg : "error") + ")");
          } else if (rc == Z_BUF_ERROR && z.avail_in != 0) {
            fail_member(name + ".npy", "is not a valid deflate stream (zlib made no progress)");
          }
        }
        if (whole && (z.avail_in != 0 || taken != e.compressed)) {
          fail_member(name + ".npy", "ends its deflate stream before its declared " + std::to_string(e.compressed) +
                                         " compressed bytes: the zip lies about its sizes");
        }
      } catch (...) {
        inflateEnd(&z);
        throw;
      }
      inflateEnd(&z);
    }
    if (whole && produced != e.uncompressed) {
      fail_member(name + ".npy", "holds " + std::to_string(produced) + " bytes, its central directory says " +
                            std::to_string(e.uncompressed) + ": the zip lies about its sizes");
    }
    if (whole && crc != e.crc) {
      char text[64];
      std::snprintf(text, sizeof text, "has CRC-32 %08x, its central directory says %08x", static_cast<unsigned>(crc),
                    static_cast<unsigned>(e.crc));
      fail_member(name + ".npy", std::string(text) + ": the data are damaged");
    }
  }

  void open_directory() {
    using detail::get_le;
    if (size_ < 22) fail("holds " + std::to_string(size_) + " bytes, expected a zip archive (at least 22 bytes)");
    // The end record: the last signature whose comment runs exactly to the end of the file.
    const std::uint64_t tail_size = std::min<std::uint64_t>(size_, 22 + 0xffff);
    std::string tail(static_cast<std::size_t>(tail_size), '\0');
    read_at(size_ - tail_size, tail.data(), tail.size());
    std::uint64_t end_at = 0;
    bool found = false;
    for (std::size_t i = tail.size() - 22 + 1; i-- > 0;) {
      if (get_le(&tail[i], 4) == detail::zip_end_signature && get_le(&tail[i + 20], 2) == tail.size() - i - 22) {
        end_at = size_ - tail_size + i;
        found = true;
        break;
      }
    }
    if (!found) fail("has no zip end of central directory record, expected a zip archive (an .npz file)");
    const char* end = &tail[static_cast<std::size_t>(end_at - (size_ - tail_size))];
    if (get_le(end + 4, 2) != 0 || get_le(end + 6, 2) != 0) fail("is a multi-disk zip archive, expected one file");
    std::uint64_t count = get_le(end + 10, 2), directory_size = get_le(end + 12, 4), directory_at = get_le(end + 16, 4);
    if (get_le(end + 8, 2) != count) fail("end record: members on this disk differ from the total");
    std::uint64_t directory_end = end_at;  // the directory must end where the next record starts
    if (end_at >= 20) {
      char locator[20];
      read_at(end_at - 20, locator, 20);
      if (get_le(locator, 4) == detail::zip64_locator_signature) {
        const std::uint64_t record_at = get_le(locator + 8, 8);
        if (get_le(locator + 4, 4) != 0 || get_le(locator + 16, 4) != 1) fail("zip64 locator names another disk");
        if (record_at > end_at - 20 || end_at - 20 - record_at < 56) {
          fail("zip64 locator points to byte " + std::to_string(record_at) + ", expected a zip64 end record before byte " +
               std::to_string(end_at - 20 - 56));
        }
        char record[56];
        read_at(record_at, record, 56);
        if (get_le(record, 4) != detail::zip64_end_signature) fail("has no zip64 end record where its locator points");
        if (get_le(record + 16, 4) != 0 || get_le(record + 20, 4) != 0) fail("is a multi-disk zip64 archive, expected one file");
        count = get_le(record + 32, 8);
        if (get_le(record + 24, 8) != count) fail("zip64 end record: members on this disk differ from the total");
        directory_size = get_le(record + 40, 8);
        directory_at = get_le(record + 48, 8);
        directory_end = record_at;
      }
    }
    if (directory_at > directory_end || directory_size != directory_end - directory_at) {
      fail("central directory of " + std::to_string(directory_size) + " bytes at byte " + std::to_string(directory_at) +
           " does not end where its end record starts (byte " + std::to_string(directory_end) +
           "): the zip lies about its sizes or is truncated");
    }
    if (directory_size > npz_max_directory) {
      fail("central directory of " + std::to_string(directory_size) + " bytes, expected at most " +
           std::to_string(npz_max_directory) + " (100 MB)");
    }
    if (count > directory_size / 46) {
      fail("end record says " + std::to_string(count) + " members, but the central directory's " +
           std::to_string(directory_size) + " bytes hold at most " + std::to_string(directory_size / 46) +
           ": the central directory is truncated");
    }
    std::string dir(static_cast<std::size_t>(directory_size), '\0');
    read_at(directory_at, dir.data(), dir.size());
    std::size_t p = 0;
    std::set<std::string> names;
    for (std::uint64_t k = 0; k < count; ++k) {
      const std::string which = "central directory entry " + std::to_string(k) + " of " + std::to_string(count);
      if (dir.size() - p < 46) fail(which + " runs past the directory's end: the central directory is truncated");
      const char* h = &dir[p];
      if (get_le(h, 4) != detail::zip_central_signature) {
        fail(which + " has no central directory signature at byte " + std::to_string(directory_at + p) +
             ": the central directory is truncated or damaged");
      }
      const std::uint64_t flags = get_le(h + 8, 2), method = get_le(h + 10, 2);
      npz_entry e;
      e.crc = static_cast<std::uint32_t>(get_le(h + 16, 4));
      e.compressed = get_le(h + 20, 4);
      e.uncompressed = get_le(h + 24, 4);
      const std::size_t name_len = static_cast<std::size_t>(get_le(h + 28, 2));
      const std::size_t extra_len = static_cast<std::size_t>(get_le(h + 30, 2));
      const std::size_t comment_len = static_cast<std::size_t>(get_le(h + 32, 2));
      const std::uint64_t disk = get_le(h + 34, 2);
      std::uint64_t offset = get_le(h + 42, 4);
      if (dir.size() - p - 46 < name_len + extra_len + comment_len) {
        fail(which + " runs past the directory's end: the central directory is truncated");
      }
      const std::string member(h + 46, name_len);
      // The zip64 extra field: the fields that are 0xffffffff above, in this order.
      std::uint64_t* wide[] = {&e.uncompressed, &e.compressed, &offset};
      const bool needs[] = {e.uncompressed == detail::zip_max32, e.compressed == detail::zip_max32,
                            offset == detail::zip_max32};
      for (std::size_t x = 0; x + 4 <= extra_len;) {
        const char* f = h + 46 + name_len + x;
        const std::size_t id = static_cast<std::size_t>(get_le(f, 2)), len = static_cast<std::size_t>(get_le(f + 2, 2));
        if (x + 4 + len > extra_len) fail("member '" + member + "': its extra field runs past its declared length");
        if (id == 0x0001) {
          std::size_t at = 0;
          for (int w = 0; w < 3; ++w) {
            if (!needs[w]) continue;
            if (at + 8 > len) fail("member '" + member + "': its zip64 extra field is too short for its sizes");
            *wide[w] = get_le(f + 4 + at, 8);
            at += 8;
          }
        }
        x += 4 + len;
      }
      for (int w = 0; w < 3; ++w) {
        if (needs[w] && *wide[w] == detail::zip_max32) fail("member '" + member + "': a size is 0xffffffff without a zip64 extra field");
      }
      p += 46 + name_len + extra_len + comment_len;
      if (disk != 0) fail("member '" + member + "' is on another disk, expected one file");
      if (flags & 0x0001) fail_member(member, "is encrypted, expected a plain member");
      if (method != 0 && method != 8) {
        fail_member(member, "uses compression method " + std::to_string(method) +
                                ", expected 0 (stored, np.savez) or 8 (deflated, np.savez_compressed)");
      }
      if (member.size() < 5 || member.compare(member.size() - 4, 4, ".npy") != 0) {
        fail_member(member, "is not a .npy file, expected every member named NAME.npy (as np.savez writes)");
      }
      if (!names.insert(member).second) fail_member(member, "appears twice in the central directory, expected each name once");
      e.name = member.substr(0, member.size() - 4);
      e.deflated = method == 8;
      if (!e.deflated && e.compressed != e.uncompressed) {
        fail_member(member, "is stored, yet its sizes differ (" + std::to_string(e.compressed) + " stored, " +
                                std::to_string(e.uncompressed) + " uncompressed): the zip lies about its sizes");
      }
      // The local header: the same name and method, and its data inside the file, before the directory.
      if (offset > directory_at || directory_at - offset < 30) {
        fail_member(member, "starts at byte " + std::to_string(offset) + ", expected a local header before the central directory at byte " +
                                std::to_string(directory_at));
      }
      char local[30];
      read_at(offset, local, 30);
      if (get_le(local, 4) != detail::zip_local_signature) {
        fail_member(member, "has no local header at byte " + std::to_string(offset) + ": the zip lies about its offsets");
      }
      const std::uint64_t local_flags = get_le(local + 6, 2);
      const std::uint64_t local_name = get_le(local + 26, 2), local_extra = get_le(local + 28, 2);
      if (get_le(local + 8, 2) != method) fail_member(member, "has another method in its local header");
      e.data_at = offset + 30 + local_name + local_extra;
      if (e.data_at > directory_at) fail_member(member, "has a local header that runs into the central directory");
      std::string local_member(static_cast<std::size_t>(local_name), '\0');
      read_at(offset + 30, local_member.data(), local_member.size());
      if (local_member != member) fail_member(member, "is named '" + local_member + "' in its local header");
      if (!(local_flags & 0x0008)) {  // sizes in the local header (else in a data descriptor)
        std::uint64_t lc = get_le(local + 18, 4), lu = get_le(local + 22, 4);
        const std::uint64_t lcrc = get_le(local + 14, 4);
        if (lc == detail::zip_max32 || lu == detail::zip_max32) {
          std::string extra(static_cast<std::size_t>(local_extra), '\0');
          read_at(offset + 30 + local_name, extra.data(), extra.size());
          for (std::size_t x = 0; x + 4 <= extra.size();) {
            const std::size_t id = static_cast<std::size_t>(get_le(&extra[x], 2)), len = static_cast<std::size_t>(get_le(&extra[x + 2], 2));
            if (x + 4 + len > extra.size()) break;
            if (id == 0x0001 && len >= 16) {
              lu = get_le(&extra[x + 4], 8);
              lc = get_le(&extra[x + 12], 8);
            }
            x += 4 + len;
          }
        }
        if (lc != e.compressed || lu != e.uncompressed || lcrc != e.crc) {
          fail_member(member, "has sizes " + std::to_string(lc) + "/" + std::to_string(lu) +
                                  " in its local header and " + std::to_string(e.compressed) + "/" +
                                  std::to_string(e.uncompressed) + " in the central directory: the zip lies about its sizes");
        }
      }
      if (e.compressed > directory_at - e.data_at) {
        fail_member(member, "says it holds " + std::to_string(e.compressed) + " bytes from byte " +
                                std::to_string(e.data_at) + ", past the central directory at byte " +
                                std::to_string(directory_at) + ": the zip lies about its sizes (or is truncated)");
      }
      entries_.push_back(std::move(e));
      starts_.push_back(offset);
    }
    if (p != dir.size()) {
      fail("central directory holds " + std::to_string(dir.size() - p) + " bytes after its " + std::to_string(count) +
           " entries, expected none: the end record lies about the number of members");
    }
    // Members must not overlap: sorted by start, each ends before the next begins.
    std::vector<std::size_t> order(entries_.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    std::sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return starts_[a] < starts_[b]; });
    for (std::size_t k = 0; k + 1 < order.size(); ++k) {
      const npz_entry& a = entries_[order[k]];
      if (a.data_at + a.compressed > starts_[order[k + 1]]) {
        fail_member(a.name + ".npy", "runs to byte " + std::to_string(a.data_at + a.compressed) + ", into member '" +
                                         entries_[order[k + 1]].name + ".npy' at byte " +
                                         std::to_string(starts_[order[k + 1]]) + ": the zip lies about its sizes");
      }
    }
    // Each member's .npy header: dtype and shape, and a data size that fills the member.
    for (npz_entry& e : entries_) {
      const std::string member_source = source_ + " member '" + e.name + ".npy'";
      std::string head;
      const std::uint64_t first = std::min<std::uint64_t>(e.uncompressed, 12);
      stream(e, first, [&](const char* d, std::size_t n) { head.append(d, n); });
      std::uint64_t header_end = head.size();
      if (head.size() >= 12 && head.compare(0, 6, "\x93NUMPY", 6) == 0 && (head[6] == 1 || head[6] == 2)) {
        const std::size_t len_bytes = head[6] == 1 ? 2 : 4;
        const std::uint64_t header_len = detail::get_le(&head[8], static_cast<int>(len_bytes));
        if (header_len > npy_max_header_bytes) {
          fail_member(e.name + ".npy", "has a .npy header of " + std::to_string(header_len) + " bytes, expected at most " +
                                           std::to_string(npy_max_header_bytes));
        }
        header_end = std::min<std::uint64_t>(8 + len_bytes + header_len, e.uncompressed);
      }
      if (header_end > head.size()) {
        head.clear();
        stream(e, header_end, [&](const char* d, std::size_t n) { head.append(d, n); });
      }
      detail::npy_head h;
      try {
        h = detail::npy_parse_head(head, member_source);
      } catch (const std::exception& x) {
        throw std::invalid_argument(x.what());
      }
      e.dtype = h.array.type;
      e.shape = h.array.shape;
      e.header_bytes = h.data_at;
      e.data_bytes = h.data_bytes;
      if (h.data_bytes > e.uncompressed - h.data_at || h.data_bytes != e.uncompressed - h.data_at) {
        fail_member(e.name + ".npy", "has a .npy header for shape " + detail::npy_shape_text(e.shape) + " of " +
                                         npy_type_name(e.dtype) + " (" + std::to_string(h.data_bytes) +
                                         " data bytes), but holds " + std::to_string(e.uncompressed - h.data_at) +
                                         ": the zip lies about its sizes");
      }
    }
  }

  std::string source_;
  int fd_ = -1;
  std::uint64_t size_ = 0;
  std::vector<npz_entry> entries_;
  std::vector<std::uint64_t> starts_;  // local header offsets, by entry
};

/// Every array of the .npz file at `path`, in memory, by name (np.load(path) in C++).
inline std::map<std::string, npy_array> read_npz(const std::string& path, const std::string& what = "file") {
  const npz_reader r(path, what);
  std::map<std::string, npy_array> out;
  for (const npz_entry& e : r.entries()) out[e.name] = r.array(e);
  return out;
}

}  // namespace kindling

#endif  // KINDLING_IO_NPZ_HPP
