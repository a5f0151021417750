// kindling/io/manifest.hpp: model plans in JSON, writing a whole model into one
// multi-tensor file, and the manifest that records what every parameter received.
//
// A plan file:
//   {"format": "kindling-model-plan", "seed": 7,
//    "parameters": [
//      {"name": "conv1.weight", "dtype": "f32", "scheme": "he-normal",
//       "layer": {"kind": "convolution", "in": 3, "out": 16, "kernel": [7]}},
//      {"name": "gru.w_ih", "dtype": "f32", "scheme": "glorot-uniform",
//       "layer": {"kind": "packed", "blocks": 3, "in": 32, "block_out": 48,
//                 "order": ["reset", "update", "new"]}},
//      {"name": "conv1.bias", "scheme": "zeros", "layer": {"kind": "bias", "size": 16}}]}
// Layer kinds and keys: dense (in, out, layout: out_in | in_out), convolution and
// transposed_convolution (in, out, kernel, groups = 1, layout: the fan.hpp names),
// embedding (vocabulary, dimension), packed (blocks, in, block_out, layout, order =
// a label a block), bias (size). "dtype" is f32 (default), f64, f16 or bf16; "scheme"
// a scheme text (registry.hpp) or {"name": ..., arguments...}; "shape", if given, must
// equal the layer's. An unknown or repeated key, a wrong value or a repeated parameter
// name is std::invalid_argument naming its path (parameters[2].layer.kernel).
//
// Rules (model/rules.hpp: the pattern syntax and the precedence rule, the most specific
// pattern wins) let parameters give only their name and shape:
//   {"format": "kindling-model-plan", "seed": 7,
//    "rules": [{"match": "**.weight", "layer": "dense", "scheme": "glorot-uniform"},
//              {"match": "front.*.weight", "layer": {"kind": "convolution", "groups": 2},
//               "scheme": "he-normal"},
//              {"match": "gru.w_*", "layer": {"kind": "packed", "blocks": 3,
//                                             "order": ["reset", "update", "new"]}},
//              {"match": "**.bias", "layer": "bias", "scheme": "zeros", "dtype": "f16"}],
//    "parameters": [{"name": "front.conv1.weight", "shape": [16, 3, 7]}, ...]}
// A rule has "match" and at least one of "layer" (a kind, or {"kind", "layout",
// "groups", "blocks", "order"}: what the shape cannot tell), "scheme" and "dtype". A
// parameter's own "layer", "scheme" or "dtype" wins over any rule.
//
// The manifest (format "kindling-manifest", manifest_format_version) holds the seed
// and, per parameter, the plan entry plus shape, fans, gain, the resolved scheme text,
// its distribution's parameters for those fans (bound or sigma), the byte count and a
// digest of the bytes written: SipHash-2-4 (random/siphash.hpp) of the tensor's
// little-endian bytes under the fixed key (manifest_digest_k0, manifest_digest_k1) =
// the ASCII words "kindling" and "digest-1" read big-endian, as 16 hex digits. From the
// manifest alone each parameter can be regenerated bit for bit (plan_from_manifest).
//
// write_model(plan, seed, write) streams every parameter, computed block by block, to a
// writer of multi-tensor files and returns the manifest: write_model_safetensors
// (safetensors.hpp), or, with io/npz.hpp (which needs zlib),
//   write_model(plan, seed, [&](const auto& t) { write_npz(path, t); });
#ifndef KINDLING_IO_MANIFEST_HPP
#define KINDLING_IO_MANIFEST_HPP

#include <cstdint>
#include <cstdio>
#include <functional>
#include <map>
#include <memory>
#include <optional>
#include <set>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <vector>

#include <nlohmann/json.hpp>

#include "../model/plan.hpp"
#include "../model/rules.hpp"
#include "../random/siphash.hpp"
#include "json_keys.hpp"
#include "read_file.hpp"
#include "replace_file.hpp"
#include "safetensors.hpp"

namespace kindling {

inline constexpr std::uint64_t manifest_format_version = 1;
inline constexpr std::uint64_t manifest_digest_k0 = 0x6b696e646c696e67;  // "kindling"
inline constexpr std::uint64_t manifest_digest_k1 = 0x6469676573742d31;  // "digest-1"
/// The largest plan or manifest file read: about 500 bytes a parameter.
inline constexpr std::uint64_t plan_max_bytes = std::uint64_t{64} << 20;

namespace detail {

[[noreturn]] inline void plan_fail(const std::string& source, const std::string& path, const nlohmann::json& v,
                                   const std::string& expected) {
  std::string s = v.dump();
  if (s.size() > 60) s = s.substr(0, 57) + "...";
  throw std::invalid_argument(source + ": '" + path + "' = " + s + ", expected " + expected);
}

inline void plan_keys(const nlohmann::json& obj, const std::string& source, const std::string& path,
                      const std::vector<std::string>& allowed) {
  if (!obj.is_object()) plan_fail(source, path, obj, "an object");
  for (auto it = obj.begin(); it != obj.end(); ++it) {
    bool ok = false;
    for (const std::string& a : allowed) ok = ok || a == it.key();
    if (!ok) {
      std::string list;
      for (const std::string& a : allowed) list += (list.empty() ? "" : ", ") + a;
      throw std::invalid_argument(source + ": unknown key '" + path + "." + it.key() + "', expected one of " + list);
    }
  }
}

inline const nlohmann::json& plan_required(const nlohmann::json& obj, const std::string& source,
                                           const std::string& path, const char* key) {
  if (!obj.contains(key)) throw std::invalid_argument(source + ": '" + path + "' has no key '" + key + "'");
  return obj[key];
}

inline std::uint64_t plan_size(const nlohmann::json& v, const std::string& source, const std::string& path) {
  if (!v.is_number_unsigned() || v.get<std::uint64_t>() == 0) plan_fail(source, path, v, "a positive integer");
  return v.get<std::uint64_t>();
}

inline std::string plan_text(const nlohmann::json& v, const std::string& source, const std::string& path) {
  if (!v.is_string()) plan_fail(source, path, v, "a string");
  return v.get<std::string>();
}

inline weight_layout plan_layout(const nlohmann::json& v, const std::string& source, const std::string& path) {
  const std::string s = plan_text(v, source, path);
  for (weight_layout l : {weight_layout::out_in, weight_layout::in_out, weight_layout::out_in_spatial,
                          weight_layout::spatial_in_out, weight_layout::out_spatial_in, weight_layout::in_out_spatial,
                          weight_layout::spatial_out_in}) {
    if (s == layout_name(l)) return l;
  }
  plan_fail(source, path, v, "a layout: out_in, in_out, out_in_spatial, spatial_in_out, out_spatial_in, "
                             "in_out_spatial or spatial_out_in");
}

inline layer_description plan_layer(const nlohmann::json& l, const std::string& source, const std::string& path,
                                    std::vector<std::string>* order) {
  const std::string kind = plan_text(plan_required(l, source, path, "kind"), source, path + ".kind");
  const auto size = [&](const char* key) { return plan_size(plan_required(l, source, path, key), source, path + "." + key); };
  const auto layout = [&](weight_layout fallback) {
    return l.contains("layout") ? plan_layout(l["layout"], source, path + ".layout") : fallback;
  };
  try {
    if (kind == "dense") {
      plan_keys(l, source, path, {"kind", "in", "out", "layout"});
      return dense(size("in"), size("out"), layout(weight_layout::out_in));
    }
    if (kind == "convolution" || kind == "transposed_convolution") {
      plan_keys(l, source, path, {"kind", "in", "out", "kernel", "groups", "layout"});
      const nlohmann::json& k = plan_required(l, source, path, "kernel");
      if (!k.is_array()) plan_fail(source, path + ".kernel", k, "an array of 1 to 3 kernel sizes");
      std::vector<std::uint64_t> kernel;
      for (std::size_t i = 0; i < k.size(); ++i) kernel.push_back(plan_size(k[i], source, path + ".kernel[" + std::to_string(i) + "]"));
      const std::uint64_t groups = l.contains("groups") ? size("groups") : 1;
      if (kind == "convolution") return convolution(size("in"), size("out"), kernel, groups, layout(weight_layout::out_in_spatial));
      return transposed_convolution(size("in"), size("out"), kernel, groups, layout(weight_layout::in_out_spatial));
    }
    if (kind == "embedding") {
      plan_keys(l, source, path, {"kind", "vocabulary", "dimension"});
      return embedding(size("vocabulary"), size("dimension"));
    }
    if (kind == "packed") {
      plan_keys(l, source, path, {"kind", "blocks", "in", "block_out", "layout", "order"});
      if (l.contains("order")) {
        const nlohmann::json& o = l["order"];
        if (!o.is_array()) plan_fail(source, path + ".order", o, "an array of block labels");
        for (std::size_t i = 0; i < o.size(); ++i) order->push_back(plan_text(o[i], source, path + ".order[" + std::to_string(i) + "]"));
      }
      return packed_dense(size("blocks"), size("in"), size("block_out"), layout(weight_layout::out_in));
    }
    if (kind == "bias") {
      plan_keys(l, source, path, {"kind", "size"});
      return bias_vector{size("size")};
    }
  } catch (const std::invalid_argument& e) {
    const std::string m = e.what();
    if (m.rfind(source, 0) == 0) throw;
    throw std::invalid_argument(source + ": '" + path + "': " + m);  // a layer's own check, e.g. groups
  } catch (const std::length_error& e) {
    throw std::invalid_argument(source + ": '" + path + "': " + e.what());
  }
  plan_fail(source, path + ".kind", l["kind"], "dense, convolution, transposed_convolution, embedding, packed or bias");
}

inline nlohmann::json layer_json(const layer_description& layer, const std::vector<std::string>& order) {
  return std::visit(
      [&](const auto& l) -> nlohmann::json {
        using L = std::decay_t<decltype(l)>;
        if constexpr (std::is_same<L, dense>::value) {
          return {{"kind", "dense"}, {"in", l.in_features()}, {"out", l.out_features()}, {"layout", layout_name(l.layout())}};
        } else if constexpr (std::is_same<L, convolution>::value || std::is_same<L, transposed_convolution>::value) {
          return {{"kind", std::is_same<L, convolution>::value ? "convolution" : "transposed_convolution"},
                  {"in", l.in_channels()}, {"out", l.out_channels()}, {"kernel", l.kernel()},
                  {"groups", l.groups()}, {"layout", layout_name(l.layout())}};
        } else if constexpr (std::is_same<L, embedding>::value) {
          return {{"kind", "embedding"}, {"vocabulary", l.vocabulary()}, {"dimension", l.dimension()}};
        } else if constexpr (std::is_same<L, packed_dense>::value) {
          nlohmann::json j = {{"kind", "packed"}, {"blocks", l.blocks()}, {"in", l.in_features()},
                              {"block_out", l.block_out_features()}, {"layout", layout_name(l.layout())}};
          if (!order.empty()) j["order"] = order;
          return j;
        } else {
          return {{"kind", "bias"}, {"size", l.size}};
        }
      },
      layer);
}

inline element_kind plan_element(const nlohmann::json& v, const std::string& source, const std::string& path) {
  const std::string s = plan_text(v, source, path);
  for (element_kind k : {element_kind::f32, element_kind::f64, element_kind::f16, element_kind::bf16}) {
    if (s == element_kind_name(k)) return k;
  }
  plan_fail(source, path, v, "f32, f64, f16 or bf16");
}

}  // namespace detail

/// A scheme from JSON: a text ("he-normal(slope=0.1)") or {"name": ..., key: number...}.
inline scheme_value scheme_from_json(const nlohmann::json& v, const std::string& what) {
  if (v.is_string()) return parse_scheme(v.get<std::string>(), what);
  if (!v.is_object() || !v.contains("name") || !v["name"].is_string()) {
    detail::plan_fail("scheme", what, v, "a scheme text or an object with \"name\" and numeric arguments");
  }
  scheme_arguments_list given;
  for (auto it = v.begin(); it != v.end(); ++it) {
    if (it.key() == "name") continue;
    if (!it->is_number()) detail::plan_fail("scheme", what + "." + it.key(), *it, "a number");
    given.emplace_back(it.key(), it->get<double>());
  }
  return make_scheme_value(v["name"].get<std::string>(), given, what);
}

/// {"name": "glorot-uniform", "gain": 1.5}: every resolved argument.
inline nlohmann::json scheme_to_json(const scheme_value& s) {
  nlohmann::json j = {{"name", s.name()}};
  for (const auto& [k, x] : s.arguments()) j[k] = x;
  return j;
}

namespace detail {

inline layer_kind plan_layer_kind(const nlohmann::json& v, const std::string& source, const std::string& path) {
  const std::string s = plan_text(v, source, path);
  for (layer_kind k : {layer_kind::dense, layer_kind::convolution, layer_kind::transposed_convolution,
                       layer_kind::embedding, layer_kind::packed, layer_kind::bias}) {
    if (s == layer_kind_name(k)) return k;
  }
  plan_fail(source, path, v, "dense, convolution, transposed_convolution, embedding, packed or bias");
}

// A rule's layer: a kind ("dense") or {"kind": ..., "layout", "groups", "blocks", "order"}.
inline layer_template plan_layer_template(const nlohmann::json& l, const std::string& source, const std::string& path) {
  layer_template t;
  if (l.is_string()) {
    t.kind = plan_layer_kind(l, source, path);
  } else {
    if (!l.is_object()) plan_fail(source, path, l, "a layer kind or an object with \"kind\"");
    t.kind = plan_layer_kind(plan_required(l, source, path, "kind"), source, path + ".kind");
    std::vector<std::string> keys{"kind"};
    if (t.kind == layer_kind::dense) keys = {"kind", "layout"};
    if (t.kind == layer_kind::convolution || t.kind == layer_kind::transposed_convolution) keys = {"kind", "layout", "groups"};
    if (t.kind == layer_kind::packed) keys = {"kind", "layout", "blocks", "order"};
    plan_keys(l, source, path, keys);
    if (l.contains("layout")) t.layout = plan_layout(l["layout"], source, path + ".layout");
    if (l.contains("groups")) t.groups = plan_size(l["groups"], source, path + ".groups");
    if (l.contains("blocks")) t.blocks = plan_size(l["blocks"], source, path + ".blocks");
    if (l.contains("order")) {
      const nlohmann::json& o = l["order"];
      if (!o.is_array()) plan_fail(source, path + ".order", o, "an array of block labels");
      for (std::size_t i = 0; i < o.size(); ++i) t.order.push_back(plan_text(o[i], source, path + ".order[" + std::to_string(i) + "]"));
    }
  }
  if (t.kind == layer_kind::packed && t.blocks == 0) {
    plan_fail(source, path, l, "a packed layer with its \"blocks\" (3 for a GRU, 4 for an LSTM)");
  }
  if (t.kind == layer_kind::packed && !t.order.empty() && t.order.size() != t.blocks) {
    plan_fail(source, path + ".order", l["order"], "one label for each of the " + std::to_string(t.blocks) + " blocks");
  }
  return t;
}

inline std::vector<plan_rule> plan_rules(const nlohmann::json& v, const std::string& source) {
  if (!v.is_array()) plan_fail(source, "rules", v, "an array of rules {\"match\": pattern, \"layer\", \"scheme\", \"dtype\"}");
  std::vector<plan_rule> rules;
  for (std::size_t i = 0; i < v.size(); ++i) {
    const std::string path = "rules[" + std::to_string(i) + "]";
    const nlohmann::json& r = v[i];
    plan_keys(r, source, path, {"match", "layer", "scheme", "dtype"});
    plan_rule rule;
    rule.pattern = plan_text(plan_required(r, source, path, "match"), source, path + ".match");
    try {
      (void)name_pattern(rule.pattern);
    } catch (const std::invalid_argument& e) {
      throw std::invalid_argument(source + ": '" + path + ".match': " + e.what());
    }
    if (r.contains("layer")) rule.layer = plan_layer_template(r["layer"], source, path + ".layer");
    if (r.contains("scheme")) rule.scheme = scheme_from_json(r["scheme"], source + ": '" + path + ".scheme'");
    if (r.contains("dtype")) rule.element = plan_element(r["dtype"], source, path + ".dtype");
    if (!rule.layer && !rule.scheme && !rule.element) {
      throw std::invalid_argument(source + ": '" + path + "' sets nothing, expected \"layer\", \"scheme\" or \"dtype\"");
    }
    rules.push_back(std::move(rule));
  }
  return rules;
}

}  // namespace detail

/// A plan (and its seed) from a parsed JSON document; `source` names it in messages.
/// `extra` are further keys a parameter may carry (a manifest's records). With "rules"
/// (model/rules.hpp) a parameter may leave out its layer (then it gives its "shape"),
/// its scheme and its dtype, and the most specific matching rule gives each.
inline model_plan plan_from_json(const nlohmann::json& doc, const std::string& source, std::uint64_t* seed,
                                 const std::vector<std::string>& top_keys = {"format", "seed", "rules", "parameters"},
                                 const std::vector<std::string>& extra = {}) {
  using namespace detail;
  plan_keys(doc, source, "(top)", top_keys);
  if (doc.contains("seed")) {
    if (!doc["seed"].is_number_unsigned()) plan_fail(source, "seed", doc["seed"], "a whole number from 0 to 2^64 - 1");
    *seed = doc["seed"].get<std::uint64_t>();
  }
  const bool with_rules = doc.contains("rules");
  const std::vector<plan_rule> rules = with_rules ? plan_rules(doc["rules"], source) : std::vector<plan_rule>{};
  const nlohmann::json& params = plan_required(doc, source, "(top)", "parameters");
  if (!params.is_array() || params.empty()) plan_fail(source, "parameters", params, "a non-empty array of parameters");
  std::vector<std::string> keys{"name", "dtype", "shape", "layer", "scheme"};
  keys.insert(keys.end(), extra.begin(), extra.end());
  std::vector<parameter_request> requests;
  std::set<std::string> names;
  for (std::size_t i = 0; i < params.size(); ++i) {
    const std::string path = "parameters[" + std::to_string(i) + "]";
    const nlohmann::json& p = params[i];
    plan_keys(p, source, path, keys);
    parameter_request r;
    r.name = plan_text(plan_required(p, source, path, "name"), source, path + ".name");
    if (r.name.empty()) plan_fail(source, path + ".name", p["name"], "a non-empty name");
    if (!names.insert(r.name).second) plan_fail(source, path + ".name", p["name"], "a name not used before in the plan");
    if (p.contains("dtype")) r.element = plan_element(p["dtype"], source, path + ".dtype");
    if (!with_rules || p.contains("layer")) {
      r.layer = plan_layer(plan_required(p, source, path, "layer"), source, path + ".layer", &r.gate_order);
    }
    if (!with_rules || p.contains("scheme")) {
      r.scheme = scheme_from_json(plan_required(p, source, path, "scheme"), source + ": '" + path + ".scheme'");
    }
    if (p.contains("shape")) {
      const nlohmann::json& s = p["shape"];
      if (r.layer) {
        model_parameter mp;
        mp.layer = *r.layer;
        const nlohmann::json want = mp.full_shape();
        if (s != want) plan_fail(source, path + ".shape", s, "the layer's shape " + want.dump());
      } else {
        if (!s.is_array() || s.empty()) plan_fail(source, path + ".shape", s, "an array of 1 to 5 positive sizes");
        for (std::size_t d = 0; d < s.size(); ++d) r.shape.push_back(plan_size(s[d], source, path + ".shape[" + std::to_string(d) + "]"));
      }
    } else if (!r.layer) {
      throw std::invalid_argument(source + ": '" + path + "' has neither \"layer\" nor \"shape\", expected its shape "
                                  "(a rule gives the layer kind) or its full layer");
    }
    if (!with_rules) {
      model_parameter mp;
      mp.name = r.name;
      mp.layer = *r.layer;
      mp.gate_order = r.gate_order;
      mp.scheme = *r.scheme;
      if (r.element) mp.element = *r.element;
      try {
        detail::check_parameter(mp);
      } catch (const std::invalid_argument& e) {
        throw std::invalid_argument(source + ": '" + path + "': " + e.what());
      }
    }
    requests.push_back(std::move(r));
  }
  try {
    return apply_rules(requests, rules);
  } catch (const std::invalid_argument& e) {
    const std::string m = e.what();
    if (m.rfind(source, 0) == 0) throw;
    throw std::invalid_argument(source + ": " + m);
  }
}

/// Reads a plan file (at most plan_max_bytes).
inline model_plan read_plan(const std::string& path, std::uint64_t* seed, const std::string& what = "PLAN") {
  const std::string source = what + " '" + path + "'";
  const nlohmann::json doc = parse_json_once(read_file_bounded(path, plan_max_bytes, what, "64 MiB"), source);
  if (doc.is_object() && doc.contains("format") && doc["format"] != "kindling-model-plan") {
    detail::plan_fail(source, "format", doc["format"], "\"kindling-model-plan\"");
  }
  return plan_from_json(doc, source, seed);
}

/// The SipHash-2-4 digest of a parameter's bytes under the manifest key, as 16 hex digits.
class parameter_digest {
 public:
  void update(const char* data, std::size_t size) { state_.update(data, size); }
  std::string hex() {
    char text[17];
    std::snprintf(text, sizeof text, "%016llx", static_cast<unsigned long long>(state_.finish()));
    return text;
  }

 private:
  detail::siphash24_state state_{manifest_digest_k0, manifest_digest_k1};
};

/// The manifest record of parameter p (without its digest and byte count).
inline nlohmann::json manifest_record(const model_parameter& p) {
  nlohmann::json r = {{"name", p.name}, {"dtype", element_kind_name(p.element)}, {"shape", p.full_shape()},
                      {"layer", detail::layer_json(p.layer, p.gate_order)}, {"scheme", p.scheme.text()},
                      {"scheme_arguments", scheme_to_json(p.scheme)}};
  const fans f = p.layer_fans();
  r["fans"] = {{"in", f.fan_in}, {"out", f.fan_out}, {"receptive_field", f.receptive_field}};
  const std::optional<double> gain = p.scheme.argument("gain");
  r["gain"] = gain ? nlohmann::json(*gain) : nlohmann::json(nullptr);
  // The distribution each element (each block, for a packed layer) is drawn from.
  nlohmann::json d = {{"kind", "structured"}};
  std::visit(
      [&](const auto& s) {
        using S = std::decay_t<decltype(s)>;
        if constexpr (std::is_base_of<detail::named_scaling<S>, S>::value || std::is_same<S, fan_scaled>::value) {
          if (f.fan_in == 0) return;
          std::visit(
              [&](const auto& dist) {
                using D = std::decay_t<decltype(dist)>;
                if constexpr (std::is_same<D, dist::symmetric_uniform>::value) d = {{"kind", "uniform"}, {"bound", dist.bound}};
                else if constexpr (std::is_same<D, dist::normal>::value) d = {{"kind", "normal"}, {"sigma", dist.stddev}};
                else d = {{"kind", "truncated_normal"}, {"sigma", dist.stddev}, {"cut", dist.cut_hi}};
              },
              s.distribution(f));
        } else if constexpr (std::is_same<S, fixed_uniform>::value) {
          d = {{"kind", "uniform"}, {"low", s.lo}, {"high", s.hi}};
        } else if constexpr (std::is_same<S, fixed_normal>::value) {
          d = {{"kind", "normal"}, {"mean", s.mean}, {"sigma", s.stddev}};
        } else if constexpr (std::is_same<S, fixed_truncated_normal>::value) {
          const dist::truncated_normal t = s.distribution();
          d = {{"kind", "truncated_normal"}, {"mean", t.mean}, {"sigma", t.stddev}, {"cut", t.cut_hi}};
        } else if constexpr (std::is_same<S, constant>::value || std::is_same<S, zeros>::value) {
          d = {{"kind", "constant"}, {"value", std::is_same<S, zeros>::value ? 0.0 : p.scheme.argument("value").value_or(0.0)}};
        }
      },
      p.scheme.variant());
  r["distribution"] = d;
  return r;
}

/// How write_model computes and reports.
struct model_write_options {
  std::size_t threads = 1;  // threads computing each block of values (the bits do not depend on it)
  /// Called after each chunk written: bytes of values written so far, of `total`, and
  /// the index of the parameter being written.
  std::function<void(std::uint64_t done, std::uint64_t total, std::size_t parameter)> progress;
};

/// Writes every parameter of `plan` under `seed` through `write`, which receives the
/// tensors as sources (safetensors_source: name, dtype, shape and a fill callback, in
/// plan order) and writes them into one file, e.g.
///   write_model(plan, seed, [&](const std::vector<safetensors_source>& t) { write_npz(path, t); });
/// Returns the manifest, with each parameter's byte count and the digest of the bytes
/// the file received. The plan is checked whole before anything is written.
template <class Write>
nlohmann::json write_model(const model_plan& plan, std::uint64_t seed, Write&& write, const model_write_options& options = {}) {
  check_plan(plan);
  if (options.threads == 0) throw std::invalid_argument("kindling::write_model: argument 'options.threads' = 0, expected at least 1");
  nlohmann::json records = nlohmann::json::array();
  std::vector<parameter_digest> digests(plan.parameters.size());
  std::vector<safetensors_source> sources;
  std::uint64_t total = 0;
  auto done = std::make_shared<std::uint64_t>(0);
  for (std::size_t i = 0; i < plan.parameters.size(); ++i) {
    const model_parameter& p = plan.parameters[i];
    records.push_back(manifest_record(p));
    auto bytes = std::make_shared<parameter_bytes>(p, seed, std::uint64_t{1} << 22, options.threads);
    total += bytes->size();
    sources.push_back({p.name, p.element, p.full_shape(),
                       [bytes, &digests, &options, &total, done, i](std::uint64_t offset, char* out, std::size_t size) {
                         bytes->read(offset, out, size);
                         digests[i].update(out, size);
                         *done += size;
                         if (options.progress) options.progress(*done, total, i);
                       }});
    records.back()["bytes"] = bytes->size();
  }
  write(static_cast<const std::vector<safetensors_source>&>(sources));
  for (std::size_t i = 0; i < records.size(); ++i) records[i]["digest"] = digests[i].hex();
  return {{"format", "kindling-manifest"},
          {"format_version", manifest_format_version},
          {"values_format_version", format_version},
          {"seed", seed},
          {"digest", {{"algorithm", "SipHash-2-4"}, {"key", {"6b696e646c696e67", "6469676573742d31"}}}},
          {"parameters", records}};
}

/// Writes every parameter of `plan` under `seed` into one safetensors file at `path`
/// (streamed; tensors in plan order, named as the parameters) and returns the manifest.
/// The plan is checked whole before anything is written.
inline nlohmann::json write_model_safetensors(const model_plan& plan, std::uint64_t seed, const std::string& path,
                                              const std::string& what = "output", const model_write_options& options = {}) {
  return write_model(
      plan, seed,
      [&](const std::vector<safetensors_source>& tensors) {
        write_safetensors(path, tensors, {{"written_by", "kindling"}}, what);
      },
      options);
}

/// The plan and seed a manifest records; a manifest of another format version, or of
/// another values format version, is refused.
inline model_plan plan_from_manifest(const nlohmann::json& m, const std::string& source, std::uint64_t* seed) {
  if (!m.is_object() || m.value("format", std::string()) != "kindling-manifest") {
    detail::plan_fail(source, "format", m.is_object() && m.contains("format") ? m["format"] : nlohmann::json(nullptr),
                      "\"kindling-manifest\"");
  }
  if (!m.contains("format_version") || m["format_version"] != manifest_format_version) {
    detail::plan_fail(source, "format_version", m.value("format_version", nlohmann::json(nullptr)),
                      std::to_string(manifest_format_version) + " (the manifest format this kindling reads)");
  }
  if (!m.contains("values_format_version") || m["values_format_version"] != format_version) {
    detail::plan_fail(source, "values_format_version", m.value("values_format_version", nlohmann::json(nullptr)),
                      std::to_string(format_version) + " (the values format this kindling draws)");
  }
  nlohmann::json plan = m;
  for (nlohmann::json& r : plan["parameters"]) r["scheme"] = r.value("scheme_arguments", r["scheme"]);
  return plan_from_json(plan, source, seed, {"format", "format_version", "values_format_version", "seed", "digest", "parameters"},
                        {"scheme_arguments", "fans", "gain", "distribution", "bytes", "digest"});
}

/// Reads a manifest file.
inline nlohmann::json read_manifest(const std::string& path, const std::string& what = "MANIFEST") {
  return parse_json_once(read_file_bounded(path, plan_max_bytes, what, "64 MiB"), what + " '" + path + "'");
}

/// The digest of parameter p's values under `seed`, computed afresh (a regeneration).
inline std::string regenerate_digest(const model_parameter& p, std::uint64_t seed) {
  parameter_bytes bytes(p, seed);
  parameter_digest d;
  std::vector<char> buffer(std::size_t{1} << 20);
  for (std::uint64_t off = 0; off < bytes.size();) {
    const auto n = static_cast<std::size_t>(std::min<std::uint64_t>(buffer.size(), bytes.size() - off));
    bytes.read(off, buffer.data(), n);
    d.update(buffer.data(), n);
    off += n;
  }
  return d.hex();
}

}  // namespace kindling

#endif  // KINDLING_IO_MANIFEST_HPP
