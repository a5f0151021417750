// tests/fuzz/fuzz_shape_region.cpp: libFuzzer target for the command line's shape,
// layout and region parsing. The tool keeps these in examples/tool/common.cpp (not a
// header), so this target compiles that file in (see run.sh).
//
// Input: three lines, "SHAPE\nLAYOUT\nREGION" (e.g. "16x3x7\noiw\n0:8,0:3,2:5"); a
// missing line is empty. Each step either throws std::invalid_argument, std::domain_error
// or std::length_error (the library's contract; anything else escapes and is a finding)
// or returns values that hold their promises: positive sizes, rank 1 to 5, a region
// inside the shape, and a kindling::shape and region the library itself accepts.
#include <cstddef>
#include <cstdint>
#include <cstdlib>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

#include <kindling/view.hpp>

#include "../../examples/tool/tool.hpp"

namespace {
std::string line(const std::string& text, std::size_t* at) {
  if (*at > text.size()) return "";
  const std::size_t end = text.find('\n', *at);
  const std::string out = text.substr(*at, end == std::string::npos ? std::string::npos : end - *at);
  *at = end == std::string::npos ? text.size() + 1 : end + 1;
  return out;
}
}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  std::size_t at = 0;
  const std::string shape_arg = line(text, &at), layout_arg = line(text, &at), region_arg = line(text, &at);
  try {
    const std::vector<std::uint64_t> s = kindling::tool::parse_shape(shape_arg);
    if (s.empty() || s.size() > 5) std::abort();
    for (std::uint64_t e : s) {
      if (e == 0) std::abort();
    }
    kindling::weight_layout layout{};
    std::string layout_name;
    (void)kindling::tool::resolve_fans(s, layout_arg, std::nullopt, std::nullopt, &layout, &layout_name);
    std::vector<std::uint64_t> offset, extent;
    kindling::tool::parse_region(region_arg, s, &offset, &extent);
    if (offset.size() != s.size() || extent.size() != s.size()) std::abort();
    for (std::size_t d = 0; d < s.size(); ++d) {
      if (extent[d] == 0 || offset[d] + extent[d] > s[d]) std::abort();
    }
    const kindling::shape global(s.begin(), s.end());
    const kindling::region part(kindling::shape(offset.begin(), offset.end()), kindling::shape(extent.begin(), extent.end()));
    (void)global.element_count();
    (void)part;
  } catch (const std::invalid_argument&) {
  } catch (const std::domain_error&) {
  } catch (const std::length_error&) {
  }
  return 0;
}
