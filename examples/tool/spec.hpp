// examples/tool/spec.hpp: a layer stack described in JSON, for `kindling plan`. It is
// the tool's, not the library's (only the tool reads network specs; the library's
// public headers need no JSON library for them); tests/tool and the spec fuzz target
// include it from here.
//
//   {"input": {"width": 64, "variance": 1.0},
//    "layers": [{"width": 256, "activation": "relu", "scheme": "he-normal"},
//               {"width": 4, "activation": "identity", "scheme": "glorot-uniform",
//                "gain": 1.0, "bias_variance": 0.0, "label": "logits"}]}
//
// Keys of "input": "width" (a positive integer, required), "variance" (E[x^2] of the
// inputs, a finite number > 0, default 1). Keys of a layer: "width", "activation" and
// "scheme" (required); "gain", "bias_variance", "slope" (leaky_relu only, default 0.01),
// "std" (the standard deviation of the "normal" and "uniform" schemes, required by
// them) and "label" (optional). An optional top-level "name" names the network.
// Anything else -- an unknown or repeated key, a value of the wrong type, a negative
// or fractional width, a non-finite number -- is a std::invalid_argument or
// std::domain_error naming the key's path (e.g. layers[2].width), its value and what
// was expected. Hostile input is bounded before it is parsed: a file of at most
// spec_max_bytes, nested at most spec_max_depth levels; a gain whose square (the weight
// variance factor) overflows or vanishes is refused under its key.
//
// Feature maps, convolutions and residual blocks:
//
//   {"input": {"width": 3, "extent": [64]},                       channels over a 1-D map
//    "layers": [{"width": 16, "activation": "relu", "scheme": "he-normal",
//                "conv": {"kernel": [5], "stride": [2], "padding": "same", "dilation": [1],
//                         "groups": 1}},
//               {"residual": {"layers": [...], "scaling": "inverse-sqrt", "blocks": 4,
//                             "projection": "lecun-normal"}, "label": "block1"}]}
//
// "input.extent" (1 to 3 positive integers) makes the input a feature map of "width"
// channels.  A layer with "conv" is a convolution of "width" output channels placed on
// the map below it: "kernel" required, "stride" and "dilation" (default 1 on every
// axis), "padding" (zeros on each side, default 0; "same" for dilation (k - 1) / 2),
// "groups" (default 1).  A layer with "residual" holds only "residual" and "label": its
// "layers" are the branch (read from the top of the stack), "scaling" is none
// (default), inverse-sqrt (1/sqrt(blocks)), fixup or fixup-keep-last (Fixup's rule,
// with or without the last branch layer zeroed), "blocks" the L of those rules
// (required by them), or normalization-free (x + alpha branch(x / beta), beta the
// stream's predicted standard deviation below the block; "alpha" >= 0, default 0.2),
// "projection" a scheme for a dense projection skip.  What only the
// stack can check -- a kernel larger than the padded input, groups that do not divide
// the channels, a branch whose width does not match its skip -- is refused naming the
// key (layers[2].conv.kernel, layers[0].residual.layers) with the library's reason.
//
// Recurrent cells (propagate/recurrent.hpp):
//
//   {"recurrent": {"cell": "gru", "hidden": 64, "steps": 50, "forget_bias": 1.0,
//                  "input_scheme": "glorot-uniform", "recurrent_scheme": "orthogonal",
//                  "recurrent_gain": 1.0}, "label": "memory"}
//
// "cell" (lstm or gru) and "hidden" (its units) are required; "steps" is the number of
// time steps (required on features, the length of a 1-D map below by default, and equal
// to it if given); "forget_bias" the bias of the LSTM forget gate or the GRU update gate
// (default 1); "input_scheme" (default glorot-uniform) and "recurrent_scheme" (default
// orthogonal) one of glorot-*, he-*, lecun-* or orthogonal, "recurrent_gain" the latter's
// gain.  A cell is a top-level layer; what follows it reads its last state (build_sections).
//
// Attention blocks (propagate/attention.hpp):
//
//   {"attention": {"heads": 4, "length": 16, "width": 64, "scheme": "glorot-uniform",
//                  "output_scheme": "glorot-uniform"}, "label": "attend"}
//
// "heads" is required and must divide the model width, which is the features (or, on a
// 1-D map, the channels) of the layer below; "width", if given, must equal it.  "length"
// is the number of tokens (required on features; on a 1-D map its length by default,
// and equal to it if given).  "scheme" draws the query, key and value projections and
// "output_scheme" the output one (default: "scheme", itself glorot-uniform by default):
// glorot-*, he-* or lecun-* (elementwise schemes, which the attention prediction needs).
// A block is a top-level layer; what follows it reads its output tokens: a 1-D map of
// `width` channels over `length` positions when the layer below was a 1-D map, else
// `width` features (each token a sample of the dense layers above; build_sections).
//
// Needs nlohmann-json (Debian nlohmann-json3-dev) and, for the orthogonal scheme's
// variance, Eigen; the core of kindling needs neither.
#ifndef KINDLING_TOOL_SPEC_HPP
#define KINDLING_TOOL_SPEC_HPP

#include <array>
#include <cmath>
#include <cstdint>
#include <limits>
#include <optional>
#include <set>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <variant>
#include <vector>

#include <nlohmann/json.hpp>

#include <kindling/gain.hpp>
#include <kindling/propagate/attention.hpp>
#include <kindling/propagate/measure.hpp>
#include <kindling/propagate/recurrent.hpp>
#include <kindling/propagate/stack.hpp>
#include <kindling/schemes/registry.hpp>
#include <kindling/io/json_keys.hpp>
#include <kindling/io/read_file.hpp>

namespace kindling {

/// One dense layer of a network spec, as written.
struct layer_spec {
  std::uint64_t width = 0;
  std::string activation;          // identity, sigmoid, tanh, relu, leaky_relu, elu, selu, gelu, silu
  double slope = 0.01;             // leaky_relu's negative slope
  std::string scheme;              // glorot-uniform, ..., orthogonal, uniform, normal
  std::optional<double> gain;      // the scheme's gain (see spec_scheme_names)
  std::optional<double> stddev;    // "std" of the normal and uniform schemes
  double bias_variance = 0;
  std::string label;
  /// A convolution ("conv"): kernel, stride, padding (or same), dilation, groups.
  bool convolution = false;
  std::vector<std::uint64_t> kernel, stride, padding, dilation;
  bool same_padding = false;
  std::uint64_t groups = 1;
  /// A residual block ("residual"): its branch, scaling rule, blocks, projection scheme.
  bool residual = false;
  std::vector<layer_spec> branch;
  std::string scaling = "none";
  std::uint64_t blocks = 1;
  double alpha = 0.2;  // normalization-free: the branch output's scale
  std::string projection;
  /// A recurrent cell ("recurrent"): its kind, hidden units, steps, forget bias, schemes.
  bool recurrent = false;
  std::string cell;                                  // lstm or gru
  std::uint64_t hidden = 0;
  std::uint64_t steps = 0;                           // 0: the length of the 1-D map below
  double forget_bias = 1.0;
  std::string input_scheme = "glorot-uniform";
  std::string recurrent_scheme = "orthogonal";
  std::optional<double> recurrent_gain;
  /// An attention block ("attention"): heads, tokens (0: the length of the 1-D map
  /// below), model width (0: the features below), schemes.
  bool attention = false;
  std::uint64_t heads = 0, length = 0, model_width = 0;
  std::string projection_scheme = "glorot-uniform", output_scheme;
  /// Where the layer sits in the spec (e.g. "layers[2]"), for messages.
  std::string path;
};

/// A network spec: the input and the dense layers on top of it.
struct network_spec {
  std::string name;
  std::uint64_t input_width = 0;
  std::vector<std::uint64_t> input_extent;  // empty: features, not a map
  double input_variance = 1;
  std::vector<layer_spec> layers;
};

/// The scheme names a spec may use: the registry's schemes (schemes/registry.hpp) whose
/// weight variance the analysis knows.
inline const std::vector<std::string>& spec_scheme_names() {
  static const std::vector<std::string> names{"glorot-uniform", "glorot-normal", "he-uniform", "he-normal",
                                              "lecun-uniform",  "lecun-normal",  "orthogonal", "uniform",
                                              "normal"};
  return names;
}

/// The activation names a spec may use.
inline const std::vector<std::string>& spec_activation_names() {
  static const std::vector<std::string> names{"identity", "sigmoid", "tanh", "relu", "leaky_relu",
                                              "elu",      "selu",    "gelu", "silu"};
  return names;
}

namespace detail {

inline std::string spec_join(const std::vector<std::string>& names) {
  std::string s;
  for (const std::string& n : names) s += (s.empty() ? "" : ", ") + n;
  return s;
}

[[noreturn]] inline void spec_fail(const std::string& source, const std::string& path, const std::string& value,
                                   const std::string& expected) {
  throw std::invalid_argument("kindling network spec " + source + ": '" + path + "' = " + value + ", expected " +
                              expected);
}

inline std::string spec_value_text(const nlohmann::json& v) {
  std::string s = v.dump();
  if (s.size() > 60) s = s.substr(0, 57) + "...";
  return s;
}

inline void spec_keys(const nlohmann::json& obj, const std::string& source, const std::string& path,
                      const std::vector<std::string>& allowed) {
  if (!obj.is_object()) spec_fail(source, path, spec_value_text(obj), "an object");
  for (auto it = obj.begin(); it != obj.end(); ++it) {
    bool ok = false;
    for (const std::string& a : allowed) ok = ok || a == it.key();
    if (!ok) {
      throw std::invalid_argument("kindling network spec " + source + ": unknown key '" + path + "." + it.key() +
                                  "', expected one of " + spec_join(allowed));
    }
  }
}

inline const nlohmann::json& spec_required(const nlohmann::json& obj, const std::string& source,
                                           const std::string& path, const char* key) {
  const auto it = obj.find(key);
  if (it == obj.end()) {
    throw std::invalid_argument("kindling network spec " + source + ": '" + path + "' has no key '" + key + "'");
  }
  return *it;
}

inline std::uint64_t spec_width(const nlohmann::json& v, const std::string& source, const std::string& path) {
  if (!v.is_number_integer() || (v.is_number_unsigned() ? v.get<std::uint64_t>() == 0 : v.get<std::int64_t>() <= 0)) {
    spec_fail(source, path, spec_value_text(v), "a positive integer");
  }
  return v.get<std::uint64_t>();
}

inline double spec_number(const nlohmann::json& v, const std::string& source, const std::string& path,
                          bool positive, bool non_negative) {
  if (!v.is_number()) spec_fail(source, path, spec_value_text(v), "a number");
  const double x = v.get<double>();
  if (!std::isfinite(x) || (positive && !(x > 0)) || (non_negative && !(x >= 0))) {
    throw std::domain_error("kindling network spec " + source + ": '" + path + "' = " + spec_value_text(v) +
                            ", expected a finite number" + (positive ? " > 0" : non_negative ? " >= 0" : ""));
  }
  return x;
}

inline std::string spec_name(const nlohmann::json& v, const std::string& source, const std::string& path,
                             const std::vector<std::string>& allowed) {
  if (!v.is_string()) spec_fail(source, path, spec_value_text(v), "a string");
  const std::string s = v.get<std::string>();
  if (allowed.empty()) return s;
  for (const std::string& a : allowed) {
    if (a == s) return s;
  }
  spec_fail(source, path, spec_value_text(v), "one of " + spec_join(allowed));
}

}  // namespace detail

/// The deepest nesting of objects and arrays a spec may have: a spec needs 3
/// ({"layers": [{...}]}); the bound keeps a hostile document (200000 open brackets)
/// from exhausting the stack in the parser or in printing a value for a message.
inline constexpr std::size_t spec_max_depth = 32;

/// The largest spec file read_network_spec reads: a layer takes about 100 bytes.
inline constexpr std::uint64_t spec_max_bytes = std::uint64_t{1} << 20;

namespace detail {

// Refuses text nested deeper than spec_max_depth, counting brackets outside strings,
// before the parser sees it.
inline void spec_check_depth(const std::string& text, const std::string& source) {
  std::size_t depth = 0;
  bool in_string = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    const char c = text[i];
    if (in_string) {
      if (c == '\\') ++i;
      else if (c == '"') in_string = false;
    } else if (c == '"') {
      in_string = true;
    } else if (c == '{' || c == '[') {
      if (++depth > spec_max_depth) {
        throw std::invalid_argument("kindling network spec " + source + ": nested deeper than " +
                                    std::to_string(spec_max_depth) + " levels at byte " + std::to_string(i) +
                                    ", expected a JSON object as in examples/tool/spec.hpp (3 levels)");
      }
    } else if ((c == '}' || c == ']') && depth > 0) {
      --depth;
    }
  }
}

// A layer's gain is squared (Var W = gain^2 / fan): one whose square overflows or
// vanishes in double is refused under its own key, not as an internal variance.
inline double spec_gain(const nlohmann::json& v, const std::string& source, const std::string& path) {
  const double g = spec_number(v, source, path, true, false);
  if (!std::isfinite(g * g) || g * g < std::numeric_limits<double>::min()) {
    throw std::domain_error("kindling network spec " + source + ": '" + path + "' = " + spec_value_text(v) +
                            ", expected a number > 0 whose square (the weight variance factor) is finite and "
                            "nonzero, e.g. 1e-150 to 1e150");
  }
  return g;
}

inline std::vector<std::uint64_t> spec_sizes(const nlohmann::json& v, const std::string& source, const std::string& path,
                                             std::size_t rank, bool positive) {
  const std::string expected = (rank == 0 ? std::string("1 to 3") : std::to_string(rank)) +
                               (positive ? " positive integers" : " integers >= 0");
  if (!v.is_array() || v.empty() || v.size() > 3 || (rank != 0 && v.size() != rank)) {
    spec_fail(source, path, spec_value_text(v), "an array of " + expected + (rank != 0 ? " (one per kernel axis)" : ""));
  }
  std::vector<std::uint64_t> out;
  for (const nlohmann::json& e : v) {
    const bool ok = e.is_number_unsigned() || (e.is_number_integer() && e.get<std::int64_t>() >= 0);
    if (!ok || (positive && e.get<std::uint64_t>() == 0) || e.get<std::uint64_t>() > (std::uint64_t{1} << 32)) {
      spec_fail(source, path, spec_value_text(v), "an array of " + expected + " up to 2^32");
    }
    out.push_back(e.get<std::uint64_t>());
  }
  return out;
}

inline const std::vector<std::string>& spec_scaling_names() {
  static const std::vector<std::string> names{"none", "inverse-sqrt", "fixup", "fixup-keep-last", "normalization-free"};
  return names;
}

inline layer_spec spec_layer(const nlohmann::json& l, const std::string& source, const std::string& path);

inline std::vector<layer_spec> spec_layers(const nlohmann::json& layers, const std::string& source,
                                           const std::string& path) {
  if (!layers.is_array() || layers.empty()) spec_fail(source, path, spec_value_text(layers), "a non-empty array of layers");
  std::vector<layer_spec> out;
  for (std::size_t i = 0; i < layers.size(); ++i) out.push_back(spec_layer(layers[i], source, path + "[" + std::to_string(i) + "]"));
  return out;
}

inline void spec_residual(const nlohmann::json& l, const std::string& source, const std::string& path, layer_spec& s) {
  spec_keys(l, source, path, {"residual", "label"});
  const nlohmann::json& r = l["residual"];
  const std::string rpath = path + ".residual";
  spec_keys(r, source, rpath, {"layers", "scaling", "blocks", "alpha", "projection"});
  s.residual = true;
  s.branch = spec_layers(spec_required(r, source, rpath, "layers"), source, rpath + ".layers");
  if (r.contains("scaling")) s.scaling = spec_name(r["scaling"], source, rpath + ".scaling", spec_scaling_names());
  const bool nf = s.scaling == "normalization-free";
  if (r.contains("alpha")) {
    if (!nf) {
      throw std::invalid_argument("kindling network spec " + source + ": '" + rpath + ".alpha' is given with scaling '" +
                                  s.scaling + "', expected it only with scaling 'normalization-free'");
    }
    s.alpha = spec_number(r["alpha"], source, rpath + ".alpha", false, true);
  }
  if (r.contains("blocks")) {
    // L is read by the rules that divide by it; given to another, it would be silently unused.
    if (s.scaling == "none" || nf) {
      throw std::invalid_argument("kindling network spec " + source + ": '" + rpath + ".blocks' is given with scaling '" +
                                  s.scaling + "', expected it only with scaling inverse-sqrt, fixup or fixup-keep-last");
    }
    s.blocks = spec_width(r["blocks"], source, rpath + ".blocks");
  } else if (s.scaling != "none" && !nf) {
    throw std::invalid_argument("kindling network spec " + source + ": '" + rpath + "' has scaling '" + s.scaling +
                                "' but no key 'blocks', expected the number of residual blocks L of the rule");
  }
  if (r.contains("projection")) s.projection = spec_name(r["projection"], source, rpath + ".projection", spec_scheme_names());
  if (l.contains("label")) s.label = spec_name(l["label"], source, path + ".label", {});
}

inline void spec_convolution(const nlohmann::json& c, const std::string& source, const std::string& path, layer_spec& s) {
  spec_keys(c, source, path, {"kernel", "stride", "padding", "dilation", "groups"});
  s.convolution = true;
  s.kernel = spec_sizes(spec_required(c, source, path, "kernel"), source, path + ".kernel", 0, true);
  const std::size_t rank = s.kernel.size();
  if (c.contains("stride")) s.stride = spec_sizes(c["stride"], source, path + ".stride", rank, true);
  if (c.contains("dilation")) s.dilation = spec_sizes(c["dilation"], source, path + ".dilation", rank, true);
  if (c.contains("padding")) {
    if (c["padding"].is_string()) {
      spec_name(c["padding"], source, path + ".padding", {"same"});
      s.same_padding = true;
      for (std::uint64_t k : s.kernel) {
        if (k % 2 == 0) spec_fail(source, path + ".padding", "\"same\"", "odd kernel sizes for \"same\" padding (kernel " +
                                  shape_text(s.kernel) + ")");
      }
    } else {
      s.padding = spec_sizes(c["padding"], source, path + ".padding", rank, false);
    }
  }
  if (c.contains("groups")) s.groups = spec_width(c["groups"], source, path + ".groups");
}

/// The schemes a recurrent cell's weights may name (no extra argument needed).
inline const std::vector<std::string>& spec_cell_scheme_names() {
  static const std::vector<std::string> names{"glorot-uniform", "glorot-normal", "he-uniform", "he-normal",
                                              "lecun-uniform",  "lecun-normal",  "orthogonal"};
  return names;
}

inline void spec_recurrent(const nlohmann::json& l, const std::string& source, const std::string& path, layer_spec& s) {
  spec_keys(l, source, path, {"recurrent", "label"});
  const nlohmann::json& r = l["recurrent"];
  const std::string rpath = path + ".recurrent";
  spec_keys(r, source, rpath,
            {"cell", "hidden", "steps", "forget_bias", "input_scheme", "recurrent_scheme", "recurrent_gain"});
  s.recurrent = true;
  s.cell = spec_name(spec_required(r, source, rpath, "cell"), source, rpath + ".cell", {"lstm", "gru"});
  s.hidden = spec_width(spec_required(r, source, rpath, "hidden"), source, rpath + ".hidden");
  if (s.hidden > (std::uint64_t{1} << 16)) spec_fail(source, rpath + ".hidden", spec_value_text(r["hidden"]), "at most 65536 units");
  if (r.contains("steps")) {
    s.steps = spec_width(r["steps"], source, rpath + ".steps");
    if (s.steps > (std::uint64_t{1} << 16)) spec_fail(source, rpath + ".steps", spec_value_text(r["steps"]), "at most 65536 steps");
  }
  if (r.contains("forget_bias")) s.forget_bias = spec_number(r["forget_bias"], source, rpath + ".forget_bias", false, false);
  if (r.contains("input_scheme")) {
    s.input_scheme = spec_name(r["input_scheme"], source, rpath + ".input_scheme", spec_cell_scheme_names());
  }
  if (r.contains("recurrent_scheme")) {
    s.recurrent_scheme = spec_name(r["recurrent_scheme"], source, rpath + ".recurrent_scheme", spec_cell_scheme_names());
  }
  if (r.contains("recurrent_gain")) s.recurrent_gain = spec_gain(r["recurrent_gain"], source, rpath + ".recurrent_gain");
  if (l.contains("label")) s.label = spec_name(l["label"], source, path + ".label", {});
}

/// The schemes an attention block's projections may name: elementwise ones (the
/// prediction of propagate/attention.hpp needs independent weight elements).
inline const std::vector<std::string>& spec_attention_scheme_names() {
  static const std::vector<std::string> names{"glorot-uniform", "glorot-normal", "he-uniform", "he-normal",
                                              "lecun-uniform",  "lecun-normal"};
  return names;
}

inline void spec_attention(const nlohmann::json& l, const std::string& source, const std::string& path, layer_spec& s) {
  spec_keys(l, source, path, {"attention", "label"});
  const nlohmann::json& a = l["attention"];
  const std::string apath = path + ".attention";
  spec_keys(a, source, apath, {"heads", "length", "width", "scheme", "output_scheme"});
  s.attention = true;
  s.heads = spec_width(spec_required(a, source, apath, "heads"), source, apath + ".heads");
  if (a.contains("length")) {
    s.length = spec_width(a["length"], source, apath + ".length");
    if (s.length > (std::uint64_t{1} << 16)) spec_fail(source, apath + ".length", spec_value_text(a["length"]), "at most 65536 tokens");
  }
  if (a.contains("width")) s.model_width = spec_width(a["width"], source, apath + ".width");
  if (a.contains("scheme")) {
    s.projection_scheme = spec_name(a["scheme"], source, apath + ".scheme", spec_attention_scheme_names());
  }
  s.output_scheme = s.projection_scheme;
  if (a.contains("output_scheme")) {
    s.output_scheme = spec_name(a["output_scheme"], source, apath + ".output_scheme", spec_attention_scheme_names());
  }
  if (l.contains("label")) s.label = spec_name(l["label"], source, path + ".label", {});
}

inline layer_spec spec_layer(const nlohmann::json& l, const std::string& source, const std::string& path) {
  layer_spec s;
  s.path = path;
  if (l.is_object() && l.contains("attention")) {
    spec_attention(l, source, path, s);
    return s;
  }
  if (l.is_object() && l.contains("residual")) {
    spec_residual(l, source, path, s);
    return s;
  }
  if (l.is_object() && l.contains("recurrent")) {
    spec_recurrent(l, source, path, s);
    return s;
  }
  spec_keys(l, source, path, {"width", "activation", "scheme", "gain", "bias_variance", "slope", "std", "label", "conv"});
  s.width = spec_width(spec_required(l, source, path, "width"), source, path + ".width");
  s.activation = spec_name(spec_required(l, source, path, "activation"), source, path + ".activation",
                           spec_activation_names());
  s.scheme = spec_name(spec_required(l, source, path, "scheme"), source, path + ".scheme", spec_scheme_names());
  if (l.contains("gain")) s.gain = spec_gain(l["gain"], source, path + ".gain");
  if (l.contains("bias_variance")) s.bias_variance = spec_number(l["bias_variance"], source, path + ".bias_variance", false, true);
  if (l.contains("slope")) {
    if (s.activation != "leaky_relu") {
      spec_fail(source, path + ".slope", spec_value_text(l["slope"]), "no 'slope' unless the activation is leaky_relu");
    }
    s.slope = spec_number(l["slope"], source, path + ".slope", false, true);
  }
  const bool fixed = s.scheme == "normal" || s.scheme == "uniform";
  if (l.contains("std")) {
    if (!fixed) spec_fail(source, path + ".std", spec_value_text(l["std"]), "no 'std' unless the scheme is normal or uniform");
    s.stddev = spec_number(l["std"], source, path + ".std", true, false);
  } else if (fixed) {
    throw std::invalid_argument("kindling network spec " + source + ": '" + path + "' has scheme '" + s.scheme +
                                "' but no key 'std', expected its standard deviation");
  }
  if (s.gain && fixed) {
    spec_fail(source, path + ".gain", spec_value_text(l["gain"]), "no 'gain' with scheme '" + s.scheme + "' (give 'std')");
  }
  if (l.contains("label")) s.label = spec_name(l["label"], source, path + ".label", {});
  if (l.contains("conv")) spec_convolution(l["conv"], source, path + ".conv", s);
  return s;
}

}  // namespace detail

inline layer_stack build_stack(const network_spec& spec);
namespace detail {
inline void build_all_sections(const network_spec& spec);  // build_sections, for its checks
}

/// Parses the JSON text of a network spec; `source` names it in messages.
inline network_spec parse_network_spec(const std::string& text, const std::string& source = "(text)") {
  using namespace detail;
  spec_check_depth(text, source);
  repeated_json_key repeated;  // io/json_keys.hpp: a spec with a repeated key is refused
  nlohmann::json doc;
  try {
    doc = detail::parse_json_noting_repeats(text, &repeated);
  } catch (const nlohmann::json::parse_error& e) {
    throw std::invalid_argument("kindling network spec " + source + ": not valid JSON (byte " +
                                std::to_string(e.byte) + "), expected a JSON object as in examples/tool/spec.hpp");
  } catch (const nlohmann::json::exception& e) {
    // Anything else the parser rejects (a number beyond double's range, found by the
    // fuzzer: tests/fuzz/regressions/spec/number_overflow_406.json) is bad input too.
    throw std::invalid_argument("kindling network spec " + source + ": not a JSON document we can read (" +
                                std::string(e.what()) + "), expected a JSON object as in examples/tool/spec.hpp");
  }
  if (!repeated.key.empty()) {
    throw std::invalid_argument("kindling network spec " + source + ": key '" + repeated.key +
                                "' appears twice in one object, expected each key once");
  }
  network_spec spec;
  spec_keys(doc, source, "(top)", {"name", "input", "layers"});
  if (doc.contains("name")) spec.name = spec_name(doc["name"], source, "name", {});
  const nlohmann::json& input = spec_required(doc, source, "(top)", "input");
  spec_keys(input, source, "input", {"width", "variance", "extent"});
  spec.input_width = spec_width(spec_required(input, source, "input", "width"), source, "input.width");
  if (input.contains("variance")) spec.input_variance = spec_number(input["variance"], source, "input.variance", true, false);
  if (input.contains("extent")) spec.input_extent = spec_sizes(input["extent"], source, "input.extent", 0, true);
  spec.layers = spec_layers(spec_required(doc, source, "(top)", "layers"), source, "layers");
  // What only the stack can check (geometry, channels, branch widths), under its key.
  try {
    detail::build_all_sections(spec);
  } catch (const std::invalid_argument& e) {
    const std::string what = e.what(), named = "kindling network spec: ";
    throw std::invalid_argument("kindling network spec " + source + ": " +
                                (what.rfind(named, 0) == 0 ? what.substr(named.size()) : what));
  } catch (const std::length_error& e) {
    throw std::invalid_argument("kindling network spec " + source + ": " + e.what());
  }
  return spec;
}

/// Reads a network spec from a file of at most spec_max_bytes (a device, a FIFO or a
/// huge file is refused before it fills memory); `what` names the file in the errors
/// of opening and reading it (e.g. "SPEC").
inline network_spec read_network_spec(const std::string& path, const std::string& what = "kindling network spec: file") {
  const std::string text = read_file_bounded(path, spec_max_bytes, what, "1 MiB, far more than a network spec needs");
  return parse_network_spec(text, "'" + path + "'");
}

/// The activation a layer spec names.
inline activation spec_activation(const layer_spec& l) {
  const std::string& a = l.activation;
  if (a == "identity") return activation::identity();
  if (a == "sigmoid") return activation::sigmoid();
  if (a == "tanh") return activation::tanh();
  if (a == "relu") return activation::relu();
  if (a == "leaky_relu") return activation::leaky_relu(l.slope);
  if (a == "elu") return activation::elu();
  if (a == "selu") return activation::selu();
  if (a == "gelu") return activation::gelu();
  if (a == "silu") return activation::silu();
  throw std::invalid_argument("kindling::spec_activation: argument 'activation' = '" + a + "', expected one of " +
                              detail::spec_join(spec_activation_names()));
}

namespace detail {
// Calls f with the scheme a spec names, for the schemes whose variance the analysis knows.
template <class F>
void with_spec_scheme(const std::string& name, const scheme_arguments_list& given, F&& f) {
  const scheme_value scheme = make_scheme_value(name, given, "kindling::build_stack: argument 'scheme'");
  std::visit(
      [&](const auto& sc) {
        using S = std::decay_t<decltype(sc)>;
        if constexpr (has_variance<S>::value || std::is_same<S, fixed_normal>::value ||
                      std::is_same<S, fixed_uniform>::value || std::is_same<S, orthogonal>::value) {
          f(sc);
        } else {
          throw std::invalid_argument("kindling::build_stack: argument 'scheme' = '" + name + "', expected one of " +
                                      spec_join(spec_scheme_names()));
        }
      },
      scheme.variant());
}

// The key a library refusal belongs to: the messages name the argument that failed.
inline std::string spec_key_of(const layer_spec& l, const std::string& what) {
  if (l.residual) return l.path + ".residual.layers";
  if (!l.convolution) return l.path;
  if (what.find("groups") != std::string::npos) return l.path + ".conv.groups";
  if (what.find("in_channels") != std::string::npos || what.find("feature map") != std::string::npos) return l.path + ".conv";
  return l.path + ".conv.kernel";
}

inline void spec_add_layers(layer_stack& stack, const std::vector<layer_spec>& layers) {
  for (const layer_spec& l : layers) {
    if (l.recurrent) {
      throw std::invalid_argument("kindling network spec: '" + l.path + ".recurrent' is refused: a recurrent cell "
                                  "inside a residual branch, expected recurrent cells only in the top-level "
                                  "'layers'");
    }
    if (l.attention) {
      throw std::invalid_argument("kindling network spec: '" + l.path + ".attention' is refused: an attention block "
                                  "inside a residual branch, expected attention blocks only in the top-level "
                                  "'layers'");
    }
    try {
      if (l.residual) {
        layer_stack branch = stack.top_extent().empty() ? layer_stack(stack.top_width())
                                                        : layer_stack::feature_maps(stack.top_width(), stack.top_extent());
        spec_add_layers(branch, l.branch);
        const residual_scaling scaling = l.scaling == "inverse-sqrt"      ? residual_scaling::inverse_sqrt(l.blocks)
                                         : l.scaling == "fixup"           ? residual_scaling::fixup(l.blocks)
                                         : l.scaling == "fixup-keep-last" ? residual_scaling::fixup(l.blocks, false)
                                         : l.scaling == "normalization-free"
                                             ? normalization_free_scaling(stack, l.alpha)
                                             : residual_scaling::none();
        if (l.projection.empty()) {
          stack.add_residual(branch, scaling, l.label);
        } else {
          with_spec_scheme(l.projection, {}, [&](const auto& sc) { stack.add_projected_residual(branch, sc, scaling, l.label); });
        }
        continue;
      }
      const activation act = spec_activation(l);
      const double slope = l.activation == "leaky_relu" ? l.slope : 0.0;
      // The scheme comes from the registry (schemes/registry.hpp), as everywhere else.
      scheme_arguments_list given;
      if (l.gain) given.emplace_back("gain", *l.gain);
      if (l.stddev) given.emplace_back("std", *l.stddev);
      const scheme_entry* entry = find_scheme_entry(l.scheme);
      if (slope != 0.0 && entry != nullptr && entry->argument("slope") != nullptr) given.emplace_back("slope", slope);
      with_spec_scheme(l.scheme, given, [&](const auto& sc) {
        if (!l.convolution) {
          stack.add_dense(l.width, act, sc, l.bias_variance, l.label);
          return;
        }
        if (stack.top_extent().empty()) {
          throw std::invalid_argument("a convolution needs a feature map below it, expected 'input.extent' and no dense "
                                      "layer below the convolution");
        }
        const convolution conv(stack.top_width(), l.width, l.kernel, l.groups);
        convolution_geometry g{l.stride, l.padding, l.dilation};
        if (l.same_padding) g.padding = same_padding(l.kernel, l.dilation);
        stack.add_convolution(conv, g, act, sc, l.bias_variance, l.label);
      });
    } catch (const std::invalid_argument& e) {
      const std::string what = e.what();
      if (what.rfind("kindling network spec", 0) == 0) throw;  // already named (an inner branch layer)
      throw std::invalid_argument("kindling network spec: '" + spec_key_of(l, what) + "' is refused: " + what);
    }
  }
}
}  // namespace detail

/// The layer stack a spec describes. A gain on a He or LeCun scheme scales its standard
/// deviation: Var W = gain^2 / fan (the fan of the scheme), drawn as that scheme draws;
/// He schemes under leaky_relu use its slope (He et al. 2015, eq. 14).  Convolutions are
/// placed on the map below them, residual branches read the top of the stack.
inline layer_stack build_stack(const network_spec& spec) {
  for (const layer_spec& l : spec.layers) {
    if (l.recurrent || l.attention) {
      throw std::invalid_argument("kindling network spec: '" + l.path + "' is " +
                                  (l.recurrent ? "a recurrent cell" : "an attention block") +
                                  ", expected a stack without cells or attention blocks here (build_sections reads "
                                  "them)");
    }
  }
  layer_stack stack = spec.input_extent.empty()
                          ? layer_stack(spec.input_width, spec.input_variance)
                          : layer_stack::feature_maps(spec.input_width, spec.input_extent, spec.input_variance);
  detail::spec_add_layers(stack, spec.layers);
  return stack;
}

/// A spec cut at its recurrent cells and attention blocks, in spec order: stacks[k] is
/// the part below cut k (it may have no layers) and stacks.back() the part above the
/// last cut.  Neither a cell's last state nor an attention block's output has a closed
/// form for its second moment (propagate/recurrent.hpp, propagate/attention.hpp): the
/// stack above cut k is built with input second moment cut_moments[k] (1 when not given;
/// `kindling plan` passes the moment it measured).
/// A cell reads the map below it as a sequence when it is 1-D (channels the features,
/// the axis the steps: "steps" may be left out, or must equal its length); on features
/// it reads a fresh input of that width at each of its "steps" steps; above it: its
/// hidden features.  An attention block reads the 1-D map below as its tokens (or
/// "length" tokens of the features below); above it: the same map, or features.
struct network_sections {
  /// One cut: a recurrent cell (cells[index]) or an attention block (attention[index]).
  struct cut {
    bool attention = false;
    std::size_t index = 0;
  };
  std::vector<layer_stack> stacks;
  std::vector<cut> cuts;
  std::vector<recurrent_cell> cells;
  std::vector<std::string> cell_paths;  // e.g. "layers[3]", for messages
  std::vector<attention_block> attention;
  std::vector<std::string> attention_paths;
};

namespace detail {
// An attention block on top of `below`: its width the features (or 1-D map channels)
// there, its length the map's (or "length" on features); refusals name the spec key.
inline attention_block spec_attention_block(const layer_spec& l, const layer_stack& below, std::size_t index) {
  const std::string key = l.path + ".attention";
  const std::vector<std::uint64_t> extent = below.top_extent();
  if (extent.size() > 1) {
    throw std::invalid_argument("kindling network spec: '" + l.path + "' is refused: the map below has extent " +
                                shape_text(extent) + ", expected a 1-D map (its axis the tokens) or features below "
                                "an attention block");
  }
  std::uint64_t width = extent.empty() ? below.top_features() : below.top_width(), length = l.length;
  if (extent.size() == 1) {
    if (length != 0 && length != extent[0]) {
      throw std::invalid_argument("kindling network spec: '" + key + ".length' = " + std::to_string(length) +
                                  ", expected the length of the 1-D map below, " + std::to_string(extent[0]) +
                                  " (or no 'length')");
    }
    length = extent[0];
  } else if (length == 0) {
    throw std::invalid_argument("kindling network spec: '" + key + "' has no key 'length', expected the number of "
                                "tokens (the layer below is not a 1-D map)");
  }
  if (l.model_width != 0 && l.model_width != width) {
    throw std::invalid_argument("kindling network spec: '" + key + ".width' = " + std::to_string(l.model_width) +
                                ", expected the width of the layer below, " + std::to_string(width));
  }
  if (width % l.heads != 0) {
    throw std::invalid_argument("kindling network spec: '" + key + ".heads' = " + std::to_string(l.heads) +
                                ", expected a divisor of the model width " + std::to_string(width));
  }
  if (width > (std::uint64_t{1} << 16) || length > (std::uint64_t{1} << 16)) {
    throw std::invalid_argument("kindling network spec: '" + key + "' has width " + std::to_string(width) +
                                " and length " + std::to_string(length) + ", expected at most 65536 each");
  }
  std::array<projection_scheme, 4> schemes;
  for (std::size_t i = 0; i < 4; ++i) {
    with_spec_scheme(i < 3 ? l.projection_scheme : l.output_scheme, {},
                     [&](const auto& sc) { schemes[i] = projection_scheme::of(sc, width); });
  }
  const std::string label = l.label.empty() ? "attention" + std::to_string(index + 1) : l.label;
  return attention_block(width, l.heads, length, std::move(schemes), label);
}
}  // namespace detail

inline network_sections build_sections(const network_spec& spec, const std::vector<double>& cut_moments = {}) {
  network_sections out;
  layer_stack current = spec.input_extent.empty()
                            ? layer_stack(spec.input_width, spec.input_variance)
                            : layer_stack::feature_maps(spec.input_width, spec.input_extent, spec.input_variance);
  std::vector<layer_spec> pending;
  for (const layer_spec& l : spec.layers) {
    const auto moment_above = [&] {
      const std::size_t k = out.cuts.size() - 1;
      return k < cut_moments.size() ? cut_moments[k] : 1.0;
    };
    if (l.attention) {
      detail::spec_add_layers(current, pending);
      pending.clear();
      out.attention.push_back(detail::spec_attention_block(l, current, out.attention.size()));
      out.attention_paths.push_back(l.path);
      out.cuts.push_back({true, out.attention.size() - 1});
      const attention_block& a = out.attention.back();
      const bool map = current.top_extent().size() == 1;
      out.stacks.push_back(std::move(current));
      current = map ? layer_stack::feature_maps(a.width(), {a.length()}, moment_above())
                    : layer_stack(a.width(), moment_above());
      continue;
    }
    if (!l.recurrent) {
      pending.push_back(l);
      continue;
    }
    detail::spec_add_layers(current, pending);
    pending.clear();
    const std::vector<std::uint64_t> extent = current.top_extent();
    const std::string key = l.path + ".recurrent.steps";
    std::uint64_t steps = l.steps, in = current.top_features();
    if (extent.size() > 1) {
      throw std::invalid_argument("kindling network spec: '" + l.path + "' is refused: the map below has extent " +
                                  detail::shape_text(extent) + ", expected a 1-D map (its axis the time steps) or "
                                  "features below a recurrent cell");
    }
    if (extent.size() == 1) {
      if (steps != 0 && steps != extent[0]) {
        throw std::invalid_argument("kindling network spec: '" + key + "' = " + std::to_string(steps) +
                                    ", expected the length of the 1-D map below, " + std::to_string(extent[0]) +
                                    " (or no 'steps')");
      }
      steps = extent[0];
      in = current.top_width();
    } else if (steps == 0) {
      throw std::invalid_argument("kindling network spec: '" + l.path + ".recurrent' has no key 'steps', expected "
                                  "the number of time steps (the layer below is not a 1-D map)");
    }
    if (steps > (std::uint64_t{1} << 16)) {
      throw std::invalid_argument("kindling network spec: '" + key + "' = " + std::to_string(steps) +
                                  " (the map below), expected at most 65536 steps");
    }
    const cell_kind kind = l.cell == "lstm" ? cell_kind::lstm : cell_kind::gru;
    const std::uint64_t g = gate_blocks(kind);
    packed_scheme input, recurrent;
    detail::with_spec_scheme(l.input_scheme, {}, [&](const auto& sc) {
      input = packed_scheme::of(sc, packed_dense(g, in, l.hidden));
    });
    scheme_arguments_list given;
    if (l.recurrent_gain) given.emplace_back("gain", *l.recurrent_gain);
    detail::with_spec_scheme(l.recurrent_scheme, given, [&](const auto& sc) {
      recurrent = packed_scheme::of(sc, packed_dense(g, l.hidden, l.hidden));
    });
    const std::string label = l.label.empty() ? "cell" + std::to_string(out.cells.size() + 1) : l.label;
    out.stacks.push_back(std::move(current));
    out.cells.emplace_back(kind, in, l.hidden, steps, std::move(input), std::move(recurrent), l.forget_bias, label);
    out.cell_paths.push_back(l.path);
    out.cuts.push_back({false, out.cells.size() - 1});
    current = layer_stack(l.hidden, moment_above());
  }
  detail::spec_add_layers(current, pending);
  out.stacks.push_back(std::move(current));
  return out;
}

namespace detail {
inline void build_all_sections(const network_spec& spec) { (void)build_sections(spec); }
}  // namespace detail

}  // namespace kindling

#endif  // KINDLING_TOOL_SPEC_HPP
