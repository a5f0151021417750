// examples/tool/draw.cpp: `kindling draw` writes the values a scheme gives a parameter
// (seed, name, shape, element type) to a .npy file: golden tensors for tests in any
// language. With --region only that block is computed and written; its values are
// those it has in the whole tensor (the reproducibility contract, DEVELOPERS.md).
// With --blocks the weight is packed gates (kindling::packed_dense): each block is drawn
// with its own fans and sub-stream, the bits a model plan's "packed" layer gets.
#include <cstdio>
#include <optional>
#include <stdexcept>
#include <string>
#include <variant>
#include <vector>

#include <kindling/element.hpp>
#include <kindling/fan.hpp>
#include <kindling/fill.hpp>
#include <kindling/io/npy.hpp>
#include <kindling/random/stream.hpp>
#include <kindling/schemes/detail/unit_matrix.hpp>
#include <kindling/schemes/scheme.hpp>
#include <kindling/view.hpp>

#include "output.hpp"
#include "schemes.hpp"
#include "tool.hpp"

namespace kindling::tool {

namespace {

// Values are computed for the region only; the cap keeps a typo in --shape from
// asking for more memory than a machine has.
constexpr std::uint64_t max_elements = std::uint64_t{1} << 32;

// Bytes an element of --dtype takes; an unknown --dtype is refused here, before any work.
std::uint64_t element_bytes(const std::string& dtype) {
  if (dtype == "f32") return 4;
  if (dtype == "f64") return 8;
  if (dtype == "f16" || dtype == "bf16") return 2;
  throw std::invalid_argument("--dtype '" + dtype + "': expected f32, f64, f16 or bf16");
}

template <class E>
npy_array draw_values(const any_scheme& scheme, const std::vector<std::uint64_t>& global,
                      const std::vector<std::uint64_t>& offset, const std::vector<std::uint64_t>& extent,
                      const weight_info& w, const std::optional<packed_dense>& packed, const stream& s,
                      std::size_t threads) {
  std::uint64_t n = 1;
  for (std::uint64_t e : extent) n *= e;
  std::vector<E> values(static_cast<std::size_t>(n));
  const strided_view<E> view(values.data(), shape(global.begin(), global.end()),
                             region(shape(offset.begin(), offset.end()), shape(extent.begin(), extent.end())));
  const thread_executor exec(threads);
  std::visit(
      [&](const auto& sc) {
        if (packed) initialize(view, *packed, sc, s, exec);  // block b: its own fans, sub-stream s.indexed(b)
        else initialize(view, w, sc, s, exec);
      },
      scheme);
  return make_npy(extent, values);
}

}  // namespace

int run_draw(const draw_options& o) {
  const any_scheme scheme = make_scheme(o.scheme);
  const std::vector<std::uint64_t> global = parse_shape(o.shape);
  weight_layout layout;
  std::string layout_name;
  const fans f = resolve_fans(global, o.layout, o.blocks ? std::nullopt : o.fan_in,
                              o.blocks ? std::nullopt : o.fan_out, &layout, &layout_name);
  const std::optional<packed_dense> packed =
      packed_layer(o.blocks, global, "--shape " + o.shape, layout, o.fan_in, o.fan_out);
  if (uses_fans(scheme) && (f.fan_in == 0 || f.fan_out == 0)) {
    throw std::invalid_argument("scheme '" + o.scheme.scheme + "' needs fans, and the rank-1 shape " +
                                shape_text(global) + " has none: give both --fan-in and --fan-out");
  }
  // sparse draws each unit's --nonzero positions among the incoming weights the shape
  // gives; a different --fan-in would be reported but not used, so it is refused.
  if (std::holds_alternative<sparse>(scheme) && o.fan_in) {
    const detail::unit_matrix m(shape(global.begin(), global.end()), layout);
    if (*o.fan_in != m.cols) {
      throw std::invalid_argument("--fan-in " + std::to_string(*o.fan_in) +
                                  " does not apply to scheme 'sparse': each unit draws its --nonzero positions "
                                  "among the " + std::to_string(m.cols) + " incoming weights of --shape " +
                                  o.shape + "; expected --fan-in " + std::to_string(m.cols) + " or no --fan-in");
    }
  }
  std::vector<std::uint64_t> offset(global.size(), 0), extent = global;
  if (!o.region.empty()) parse_region(o.region, global, &offset, &extent);
  const std::uint64_t item = element_bytes(o.dtype);
  std::uint64_t n = 1;
  for (std::uint64_t e : extent) {
    if (e != 0 && n > max_elements / e) n = max_elements + 1;
    else n *= e;
  }
  const std::string asked = "--shape " + o.shape + (o.region.empty() ? "" : " --region " + o.region);
  if (n > max_elements) {
    throw std::length_error(asked + " asks for more than 2^32 elements in one file; expected at most 2^32 (use --region)");
  }
  // The values and their encoded file are held together once: twice the file's data.
  const double peak = 2.0 * static_cast<double>(n) * static_cast<double>(item);
  if (peak > static_cast<double>(memory_budget)) {
    throw std::length_error(asked + " (" + o.dtype + ", " + std::to_string(n) + " values) needs about " +
                            bytes_text(peak) + " of memory; expected at most " +
                            bytes_text(static_cast<double>(memory_budget)) +
                            " (the tool's memory cap): write it in blocks with --region");
  }
  if (o.threads == 0) throw std::invalid_argument("--threads 0: expected at least 1 thread");
  if (o.output.empty()) throw std::invalid_argument("-o is missing: expected the output .npy file");
  check_output("-o", o.output, {});
  check_fits_element(o.scheme, o.dtype);
  const weight_info w{packed ? packed->layer_fans() : f, layout};
  if (packed) {
    // The scheme against each block's shape and fans (orthogonal, identity and sparse
    // look at the shape), refused here under the user's options rather than mid-draw.
    std::visit(
        [&](const auto& sc) {
          for (const packed_block& b : packed->all_blocks()) {
            try {
              sc.check(shape(b.shape.begin(), b.shape.end()), weight_info{b.block_fans, layout});
            } catch (const std::exception& e) {
              throw std::invalid_argument("--scheme " + o.scheme.scheme + " with --blocks " +
                                          std::to_string(*o.blocks) + " (gate blocks of " + shape_text(b.shape) +
                                          "): " + e.what());
            }
          }
        },
        scheme);
  }
  const stream s = make_stream(o.seed, o.name);
  npy_array out;
  if (o.dtype == "f32") out = draw_values<float>(scheme, global, offset, extent, w, packed, s, o.threads);
  else if (o.dtype == "f64") out = draw_values<double>(scheme, global, offset, extent, w, packed, s, o.threads);
  else if (o.dtype == "f16") out = draw_values<float16>(scheme, global, offset, extent, w, packed, s, o.threads);
  else out = draw_values<bfloat16>(scheme, global, offset, extent, w, packed, s, o.threads);
  write_output("-o", o.output, encode_npy(out));
  std::string fan_text;
  if (w.fans.fan_in != 0) {
    fan_text = ", fan-in " + std::to_string(w.fans.fan_in) + ", fan-out " + std::to_string(w.fans.fan_out);
  }
  if (packed) {
    fan_text = ", " + std::to_string(packed->blocks()) + " gate blocks of " + shape_text(packed->block(0).shape) +
               fan_text + " each";
  }
  std::printf("wrote %s: %s %s %s%s%s, seed %llu, name '%s'%s\n", o.output.c_str(), o.scheme.scheme.c_str(),
              o.dtype.c_str(), shape_text(global).c_str(), layout_name.empty() ? "" : (" " + layout_name).c_str(),
              o.region.empty() ? "" : (", region " + o.region + " " + shape_text(extent)).c_str(),
              static_cast<unsigned long long>(o.seed), o.name.c_str(), fan_text.c_str());
  return exit_ok;
}

}  // namespace kindling::tool
