// examples/tool/common.cpp: shapes, layouts, fans and regions from the command line.
#include <cstdio>
#include <limits>
#include <optional>
#include <utility>
#include <stdexcept>

#include "tool.hpp"

namespace kindling::tool {

std::string shape_text(const std::vector<std::uint64_t>& shape) {
  std::string s = "[";
  for (std::size_t i = 0; i < shape.size(); ++i) s += (i ? ", " : "") + std::to_string(shape[i]);
  return s + "]";
}

std::string number_text(double x, int digits) {
  char buffer[64];
  std::snprintf(buffer, sizeof buffer, "%.*g", digits, x);
  return buffer;
}

std::string bytes_text(double bytes) {
  const char* units[] = {"bytes", "KiB", "MiB", "GiB", "TiB", "PiB", "EiB"};
  int u = 0;
  while (bytes >= 1024 && u < 6) {
    bytes /= 1024;
    ++u;
  }
  return number_text(bytes, 3) + " " + units[u];
}

namespace {

// A decimal count: digits only, no sign, fits in 64 bits.
bool parse_count(const std::string& s, std::uint64_t* out) {
  if (s.empty() || s.size() > 20) return false;
  std::uint64_t v = 0;
  for (char c : s) {
    if (c < '0' || c > '9') return false;
    const auto d = static_cast<std::uint64_t>(c - '0');
    if (v > (std::numeric_limits<std::uint64_t>::max() - d) / 10) return false;
    v = v * 10 + d;
  }
  *out = v;
  return true;
}

std::vector<std::string> split(const std::string& s, char sep) {
  std::vector<std::string> parts;
  std::size_t start = 0;
  for (;;) {
    const std::size_t at = s.find(sep, start);
    parts.push_back(s.substr(start, at == std::string::npos ? std::string::npos : at - start));
    if (at == std::string::npos) return parts;
    start = at + 1;
  }
}

}  // namespace

std::uint64_t parse_integer(const std::string& option, const std::string& text, std::uint64_t min,
                            std::uint64_t max) {
  std::uint64_t v = 0;
  if (!parse_count(text, &v) || v < min || v > max) {
    throw std::invalid_argument(option + " '" + text + "': expected a whole number from " + std::to_string(min) +
                                " to " + std::to_string(max) + " (decimal digits only)");
  }
  return v;
}

std::vector<std::uint64_t> parse_shape(const std::string& text) {
  std::vector<std::uint64_t> shape;
  for (const std::string& part : split(text, 'x')) {
    std::uint64_t n = 0;
    if (!parse_count(part, &n) || n == 0) {
      throw std::invalid_argument("--shape '" + text + "': size '" + part +
                                  "' is not a positive integer; expected sizes joined by 'x', e.g. 512x256");
    }
    shape.push_back(n);
  }
  if (shape.size() > 5) {
    throw std::invalid_argument("--shape '" + text + "' has rank " + std::to_string(shape.size()) +
                                ", expected rank 1 to 5");
  }
  return shape;
}

weight_layout parse_layout(const std::string& text, std::size_t rank) {
  const auto bad = [&](const std::string& why) {
    return std::invalid_argument("--layout '" + text + "': " + why +
                                 "; expected oi, io, or o, i and the spatial axes w, hw or dhw in one of the orders "
                                 "oihw, hwio, ohwi (convolution) or iohw, hwoi (transposed convolution)");
  };
  if (text.size() != rank) {
    throw bad("has " + std::to_string(text.size()) + " axes but the shape has rank " + std::to_string(rank));
  }
  const std::size_t o = text.find('o'), i = text.find('i');
  if (o == std::string::npos || i == std::string::npos || text.find('o', o + 1) != std::string::npos ||
      text.find('i', i + 1) != std::string::npos) {
    throw bad("needs exactly one 'o' and one 'i'");
  }
  std::string spatial;
  for (char c : text) {
    if (c != 'o' && c != 'i') spatial += c;
  }
  static const char* const kernels[] = {"", "w", "hw", "dhw"};
  if (spatial.size() > 3 || spatial != kernels[spatial.size()]) throw bad("spatial axes '" + spatial + "' are not w, hw or dhw");
  const std::size_t s = rank - 2;
  const std::size_t k = spatial.empty() ? std::string::npos : text.find(spatial);
  if (k == std::string::npos && !spatial.empty()) throw bad("the spatial axes are not together");
  if (s == 0) return o == 0 ? weight_layout::out_in : weight_layout::in_out;
  if (o == 0 && i == 1) return weight_layout::out_in_spatial;
  if (k == 0 && i == s && o == s + 1) return weight_layout::spatial_in_out;
  if (o == 0 && k == 1 && i == s + 1) return weight_layout::out_spatial_in;
  if (i == 0 && o == 1) return weight_layout::in_out_spatial;
  if (k == 0 && o == s && i == s + 1) return weight_layout::spatial_out_in;
  throw bad("is not an order kindling knows");
}

std::string default_layout(std::size_t rank) {
  switch (rank) {
    case 2: return "oi";
    case 3: return "oiw";
    case 4: return "oihw";
    case 5: return "oidhw";
    default: return "";
  }
}

fans resolve_fans(const std::vector<std::uint64_t>& shape, const std::string& layout,
                  const std::optional<std::uint64_t>& fan_in, const std::optional<std::uint64_t>& fan_out,
                  weight_layout* layout_out, std::string* layout_name_out) {
  for (const auto& [given, name] : {std::pair<const std::optional<std::uint64_t>&, const char*>{fan_in, "--fan-in"},
                                    {fan_out, "--fan-out"}}) {
    if (given && *given == 0) throw std::invalid_argument(std::string(name) + " 0: expected a positive integer");
  }
  fans f;
  *layout_out = weight_layout::out_in;
  *layout_name_out = "";
  if (shape.size() == 1) {
    if (!layout.empty()) {
      throw std::invalid_argument("--layout '" + layout + "' given for a rank-1 shape " + shape_text(shape) +
                                  ", expected no layout (a rank-1 tensor has no axes to name)");
    }
    if (fan_in && fan_out) {
      f.fan_in = *fan_in;
      f.fan_out = *fan_out;
    }
    return f;  // fans 0: schemes that need fans say so
  }
  const std::string name = layout.empty() ? default_layout(shape.size()) : layout;
  *layout_out = parse_layout(name, shape.size());
  *layout_name_out = name;
  f = fans_from_shape(shape, *layout_out);
  if (fan_in) f.fan_in = *fan_in;
  if (fan_out) f.fan_out = *fan_out;
  return f;
}

std::optional<packed_dense> packed_layer(const std::optional<std::uint64_t>& blocks,
                                         const std::vector<std::uint64_t>& shape, const std::string& shape_source,
                                         weight_layout layout, const std::optional<std::uint64_t>& fan_in,
                                         const std::optional<std::uint64_t>& fan_out) {
  if (!blocks) return std::nullopt;
  const std::string given = "--blocks " + std::to_string(*blocks);
  if (shape.size() != 2) {
    throw std::invalid_argument(given + " describes packed gates, a dense weight, and " + shape_source + " has rank " +
                                std::to_string(shape.size()) +
                                "; expected a rank-2 shape such as 144x32 (3 blocks of 48 rows)");
  }
  for (const auto& [option, value] : {std::pair<const char*, const std::optional<std::uint64_t>&>{"--fan-in", fan_in},
                                      {"--fan-out", fan_out}}) {
    if (value) {
      throw std::invalid_argument(std::string(option) + " does not apply with " + given +
                                  ": each gate block takes its fans from its own shape; expected no " + option);
    }
  }
  const std::size_t out_axis = layout == weight_layout::out_in ? 0 : 1;
  const std::uint64_t rows = shape[out_axis];
  if (rows % *blocks != 0) {
    throw std::invalid_argument(given + " does not divide the output axis of " + shape_source + " (" +
                                std::to_string(rows) + " outputs, axis " + std::to_string(out_axis) + " of layout " +
                                (layout == weight_layout::out_in ? "oi" : "io") + "); expected a divisor of " +
                                std::to_string(rows));
  }
  return packed_dense(*blocks, shape[1 - out_axis], rows / *blocks, layout);
}

void parse_region(const std::string& text, const std::vector<std::uint64_t>& shape,
                  std::vector<std::uint64_t>* offset, std::vector<std::uint64_t>* extent) {
  const std::vector<std::string> parts = split(text, ',');
  if (parts.size() != shape.size()) {
    throw std::invalid_argument("--region '" + text + "' has " + std::to_string(parts.size()) +
                                " ranges, expected one start:end range for each of the " +
                                std::to_string(shape.size()) + " axes of " + shape_text(shape));
  }
  offset->clear();
  extent->clear();
  for (std::size_t d = 0; d < parts.size(); ++d) {
    const std::vector<std::string> ends = split(parts[d], ':');
    std::uint64_t a = 0, b = 0;
    if (ends.size() != 2 || !parse_count(ends[0], &a) || !parse_count(ends[1], &b)) {
      throw std::invalid_argument("--region '" + text + "': range '" + parts[d] + "' of axis " + std::to_string(d) +
                                  " is not start:end with non-negative integers");
    }
    if (!(a < b) || b > shape[d]) {
      throw std::invalid_argument("--region '" + text + "': range " + parts[d] + " of axis " + std::to_string(d) +
                                  " is empty or outside 0:" + std::to_string(shape[d]) +
                                  ", expected start < end <= " + std::to_string(shape[d]));
    }
    offset->push_back(a);
    extent->push_back(b - a);
  }
}

}  // namespace kindling::tool
