// examples/tool/tool.hpp: the pieces the commands of the `kindling` tool share. Each
// command is in its own file (draw.cpp, check.cpp, plan.cpp, model.cpp) so that CLI11 (main.cpp)
// and nlohmann-json are compiled once each, and the schemes are not compiled three times.
//
// Exit status: 0 success, 1 a check failed, 2 bad input. Bad input is reported by
// throwing an exception derived from std::invalid_argument, std::domain_error or
// std::length_error; main() prints its message as one line on stderr and exits 2.
#ifndef KINDLING_TOOL_TOOL_HPP
#define KINDLING_TOOL_TOOL_HPP

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include <kindling/fan.hpp>

namespace kindling::tool {

inline constexpr int exit_ok = 0;
inline constexpr int exit_check_failed = 1;
inline constexpr int exit_bad_input = 2;

/// The parameters a scheme takes from the command line (draw and check share them).
struct scheme_arguments {
  std::string scheme;                  // the scheme's name, e.g. "he-normal"
  std::optional<double> gain;          // --gain
  std::optional<double> stddev;        // --std
  std::optional<double> value;         // --value (constant)
  std::optional<std::uint64_t> nonzero;  // --nonzero (sparse)
};

struct draw_options {
  scheme_arguments scheme;
  std::string shape;                   // "512x256"
  std::string layout;                  // "" = the default of the shape's rank
  std::optional<std::uint64_t> fan_in, fan_out;
  std::optional<std::uint64_t> blocks; // --blocks: a packed gate weight of that many blocks
  std::uint64_t seed = 0;
  std::string name = "weight";
  std::string dtype = "f32";
  std::size_t threads = 1;
  std::string region;                  // "" = the whole tensor
  std::string output;
};

struct check_options {
  std::string file;
  scheme_arguments expect;             // expect.scheme empty: no conformance check
  std::string layout;
  std::optional<std::uint64_t> fan_in, fan_out;
  std::string full_shape;              // a --region file: the whole tensor's shape (gives the fans)
  std::string region;                  // and where the block sits (needed by --expect identity)
  std::optional<std::uint64_t> blocks; // --blocks: FILE is a packed gate weight of that many blocks
  bool identify = false;
  bool json = false;
  double alpha = 1e-3;                 // family-wise false-alarm rate of each report
};

struct plan_options {
  std::string spec;                    // "" = the built-in pump vibration classifier
  bool measure = false;
  std::uint64_t batch = 256;           // samples a draw
  std::size_t trials = 16;             // independent draws of the weights
  std::uint64_t seed = 0;
  bool json = false;
  std::string svg;
  std::size_t threads = 1;
};

struct assemble_options {
  std::string plan;                    // a model plan .json (kindling/io/manifest.hpp)
  std::optional<std::uint64_t> seed;   // overrides the plan's "seed"
  std::string output;                  // the .safetensors file, or .npz
  std::string manifest;                // "" = output + ".manifest.json"
  bool compress = false;               // .npz only: deflate the members
  std::size_t threads = 1;
};

struct verify_options {
  std::string file;                    // the .safetensors or .npz checkpoint
  std::string manifest;
};

struct audit_command_options {
  std::string file;                    // the .safetensors or .npz checkpoint
  std::string plan;                    // a model plan .json, or
  std::string manifest;                // a manifest (exactly one of the two)
  double alpha = 1e-3;                 // family-wise false-alarm rate of the whole audit
  bool uncorrected = false;            // each statistical report at alpha (no Bonferroni)
  bool json = false;
  std::size_t threads = 1;
};

/// The memory a run may plan to use: draw and plan estimate their peak before
/// allocating and refuse above it, naming the option that asked (--shape, --batch);
/// check reads files of at most max_check_elements elements. 8 GiB fits the machines
/// the tool is for and keeps a typo from starting a swap storm.
inline constexpr std::uint64_t memory_budget = std::uint64_t{8} << 30;
/// check holds about 32 bytes an element (the file's data, its values as doubles, a
/// regenerated copy and the audits' work space).
inline constexpr std::uint64_t max_check_elements = memory_budget / 32;
/// "8 GiB", "1.5 MiB": a size for a message.
std::string bytes_text(double bytes);

int run_draw(const draw_options& o);
int run_check(const check_options& o);
int run_plan(const plan_options& o);
int run_assemble(const assemble_options& o);
int run_verify(const verify_options& o);
int run_audit(const audit_command_options& o);

// ---- shared helpers (common.cpp) -----------------------------------------------------

/// The whole number `text` given to `option`: decimal digits only (no sign, space or
/// trailing junk), from `min` to `max`. Anything else, an empty text or a value beyond
/// 2^64 - 1 included, is std::invalid_argument naming the option, the text and the range
/// (CLI11 would wrap -1 or clamp 2^64 to 2^64 - 1 without a word).
std::uint64_t parse_integer(const std::string& option, const std::string& text, std::uint64_t min,
                            std::uint64_t max);

/// "512x256" -> {512, 256}; every size a positive integer.
std::vector<std::uint64_t> parse_shape(const std::string& text);

/// A layout spelled by its axes: o (output), i (input) and the kernel's spatial axes w,
/// hw or dhw: oi, io; oiw, oihw, oidhw; wio, hwio, dhwio; owi, ohwi, odhwi; and the
/// transposed-convolution forms iow, iohw, iodhw, woi, hwoi, dhwoi.
weight_layout parse_layout(const std::string& text, std::size_t rank);

/// The layout used when --layout is not given: oi for rank 2, oiw/oihw/oidhw for 3 to 5.
std::string default_layout(std::size_t rank);

/// The fans of a weight of `shape` in `layout` ("" = default), with --fan-in/--fan-out
/// overriding. A rank-1 shape (a bias) has fans only if both are given.
fans resolve_fans(const std::vector<std::uint64_t>& shape, const std::string& layout,
                  const std::optional<std::uint64_t>& fan_in, const std::optional<std::uint64_t>& fan_out,
                  weight_layout* layout_out, std::string* layout_name_out);

/// The packed gate layer --blocks describes for a weight of `shape` in `layout` (nothing
/// without --blocks): a rank-2 shape whose output axis the blocks divide, and no
/// --fan-in/--fan-out (each block takes its fans from its own shape). `shape_source`
/// names where the shape came from in messages ("--shape 144x32").
std::optional<packed_dense> packed_layer(const std::optional<std::uint64_t>& blocks,
                                         const std::vector<std::uint64_t>& shape, const std::string& shape_source,
                                         weight_layout layout, const std::optional<std::uint64_t>& fan_in,
                                         const std::optional<std::uint64_t>& fan_out);

/// "0:128,0:256" -> offsets and extents, checked against the shape.
void parse_region(const std::string& text, const std::vector<std::uint64_t>& shape,
                  std::vector<std::uint64_t>* offset, std::vector<std::uint64_t>* extent);

/// "[512, 256]".
std::string shape_text(const std::vector<std::uint64_t>& shape);

/// A number with `digits` significant digits.
std::string number_text(double x, int digits = 4);

}  // namespace kindling::tool

#endif  // KINDLING_TOOL_TOOL_HPP
