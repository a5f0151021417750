// kindling/model/rules.hpp: assigning layer kinds, schemes and element types to a
// model's parameters by name patterns, so a plan of hundreds of parameters is a handful
// of rules plus each parameter's name and shape.
//
//   std::vector<plan_rule> rules = {
//       {"**.weight", layer_template{layer_kind::dense}, parse_scheme("glorot-uniform")},
//       {"front.*.weight", layer_template{layer_kind::convolution}, parse_scheme("he-normal")},
//       {"**.bias", layer_template{layer_kind::bias}, parse_scheme("zeros")},
//   };
//   model_plan plan = apply_rules({{"front.conv1.weight", {16, 3, 7}}, {"front.conv1.bias", {16}},
//                                  {"head.weight", {4, 48}}, {"head.bias", {4}}}, rules);
//
// Pattern syntax (our own). A pattern is matched against the whole parameter name:
//   *     any run of characters, possibly empty, that holds no '.' (within one segment);
//   **    any run of characters, possibly empty, dots included (across segments);
//   other characters match themselves ('.' included; there is no escape and no '?').
// So "**.bias" matches "gru.bias" and "a.b.bias" but not "bias"; "front.*.weight" matches
// "front.conv1.weight" but not "front.a.b.weight". Three or more '*' in a row are refused.
//
// Precedence: the most specific pattern wins. Specificity compares, in this order,
//   1. the number of literal (non-'*') characters: more is more specific;
//   2. the number of '**': fewer is more specific;
//   3. the number of '*': fewer is more specific.
// An exact name is therefore more specific than any pattern that matches it.
// Each field (layer, scheme, element type) is resolved on its own: among the rules that
// match a parameter and set that field, the most specific one gives it. Fields the
// parameter gives itself are never taken from a rule.
//
// Errors (std::invalid_argument, naming the parameter and the rules by index and pattern):
//   - two rules that set the same field of a parameter are equally specific and none is
//     more specific (a tie), even when they agree;
//   - a parameter that no rule matches, and that does not give its layer and scheme itself;
//   - a parameter left without a layer or without a scheme (the rules that matched it
//     are named); the element type defaults to f32;
//   - a rule whose pattern matches no parameter name of the plan (a typo would otherwise
//     silently leave the rule unused);
//   - a malformed pattern, a rule that sets nothing, a layer that does not fit the shape.
#ifndef KINDLING_MODEL_RULES_HPP
#define KINDLING_MODEL_RULES_HPP

#include <cstdint>
#include <optional>
#include <set>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include "plan.hpp"

namespace kindling {

/// A compiled name pattern (see the top of this header).
class name_pattern {
 public:
  name_pattern() = default;
  explicit name_pattern(std::string text) : text_(std::move(text)) {
    constexpr const char* where = "kindling::name_pattern";
    if (text_.empty()) detail::reject_argument<std::invalid_argument>(where, "text", "''", "a non-empty pattern, e.g. **.weight");
    for (std::size_t i = 0; i < text_.size();) {
      if (text_[i] != '*') {
        ++literal_;
        ++i;
        continue;
      }
      std::size_t run = 0;
      while (i + run < text_.size() && text_[i + run] == '*') ++run;
      if (run > 2) {
        detail::reject_argument<std::invalid_argument>(
            where, "text", "'" + text_ + "'",
            "'*' (within one segment) or '**' (across segments), not " + std::to_string(run) + " '*' in a row");
      }
      (run == 1 ? single_ : double_) += 1;
      i += run;
    }
  }

  const std::string& text() const noexcept { return text_; }
  std::size_t literal_characters() const noexcept { return literal_; }
  std::size_t single_stars() const noexcept { return single_; }
  std::size_t double_stars() const noexcept { return double_; }

  /// Whether the whole of `name` matches.
  bool matches(const std::string& name) const {
    // Tokens: a literal character, '*' (1) or '**' (2). can[j] after token t: the tokens
    // up to t match name[0, j) (dynamic programming, no backtracking).
    const std::size_t n = name.size();
    std::vector<char> can(n + 1, 0), next(n + 1, 0);
    can[0] = 1;
    for (std::size_t i = 0; i < text_.size();) {
      int star = 0;
      while (i < text_.size() && text_[i] == '*' && star < 2) {
        ++star;
        ++i;
      }
      if (star == 0) {
        next[0] = 0;
        for (std::size_t j = 1; j <= n; ++j) next[j] = static_cast<char>(can[j - 1] && name[j - 1] == text_[i]);
        ++i;
      } else {
        next[0] = can[0];
        for (std::size_t j = 1; j <= n; ++j) {
          next[j] = static_cast<char>(can[j] || (next[j - 1] && (star == 2 || name[j - 1] != '.')));
        }
      }
      can.swap(next);
    }
    return can[n] != 0;
  }

  /// -1, 0 or 1 as this pattern is less, equally or more specific than `other`.
  int compare_specificity(const name_pattern& other) const noexcept {
    if (literal_ != other.literal_) return literal_ > other.literal_ ? 1 : -1;
    if (double_ != other.double_) return double_ < other.double_ ? 1 : -1;
    if (single_ != other.single_) return single_ < other.single_ ? 1 : -1;
    return 0;
  }

 private:
  std::string text_;
  std::size_t literal_ = 0, single_ = 0, double_ = 0;
};

/// The kinds of layer a rule can assign; the parameter's shape gives the sizes.
enum class layer_kind { dense, convolution, transposed_convolution, embedding, packed, bias };

inline const char* layer_kind_name(layer_kind k) noexcept {
  switch (k) {
    case layer_kind::dense: return "dense";
    case layer_kind::convolution: return "convolution";
    case layer_kind::transposed_convolution: return "transposed_convolution";
    case layer_kind::embedding: return "embedding";
    case layer_kind::packed: return "packed";
    case layer_kind::bias: return "bias";
  }
  return "?";
}

/// A layer without its sizes: the kind and what the shape cannot tell (layout, groups,
/// the number of packed blocks and their labels). make(shape) gives the layer.
struct layer_template {
  layer_kind kind = layer_kind::dense;
  std::optional<weight_layout> layout;  // default: out_in, out_in_spatial or in_out_spatial
  std::uint64_t groups = 1;             // convolutions
  std::uint64_t blocks = 0;             // packed: required (3 for a GRU, 4 for an LSTM)
  std::vector<std::string> order;       // packed: a label a block (optional)

  layer_template() = default;
  layer_template(layer_kind k) : kind(k) {}  // NOLINT: implicit, so a rule may say just layer_kind::bias
  /// A packed layer of `count` blocks (3 for a GRU, 4 for an LSTM), optionally labelled.
  static layer_template packed_blocks(std::uint64_t count, std::vector<std::string> labels = {}) {
    layer_template t(layer_kind::packed);
    t.blocks = count;
    t.order = std::move(labels);
    return t;
  }

  /// The layer whose weight has `s`; std::invalid_argument when it cannot have it.
  layer_description make(const std::vector<std::uint64_t>& s) const {
    constexpr const char* where = "kindling::layer_template::make";
    const std::string what = std::string("a ") + layer_kind_name(kind) + " layer";
    const auto need_rank = [&](std::size_t lo, std::size_t hi) {
      if (s.size() < lo || s.size() > hi) {
        detail::reject_argument<std::invalid_argument>(
            where, "shape", detail::shape_text(s) + " (rank " + std::to_string(s.size()) + ")",
            "rank " + std::to_string(lo) + (hi != lo ? " to " + std::to_string(hi) : std::string()) + " for " + what);
      }
    };
    const auto product = [where](std::uint64_t a, std::uint64_t b, const char* quantity) {
      return detail::checked_product(a, b, where, quantity);
    };
    switch (kind) {
      case layer_kind::dense: {
        need_rank(2, 2);
        const weight_layout l = layout.value_or(weight_layout::out_in);
        return l == weight_layout::in_out ? dense(s[0], s[1], l) : dense(s[1], s[0], l);
      }
      case layer_kind::embedding:
        need_rank(2, 2);
        return embedding(s[0], s[1]);
      case layer_kind::bias:
        need_rank(1, 1);
        if (s[0] == 0) detail::reject_argument<std::invalid_argument>(where, "shape", "[0]", "a positive size for a bias");
        return bias_vector{s[0]};
      case layer_kind::packed: {
        need_rank(2, 2);
        if (blocks == 0) {
          detail::reject_argument<std::invalid_argument>(where, "blocks", "0",
                                                         "the number of blocks of a packed layer (3 for a GRU, 4 for an LSTM)");
        }
        const weight_layout l = layout.value_or(weight_layout::out_in);
        const std::uint64_t rows = l == weight_layout::in_out ? s[1] : s[0];
        if (rows % blocks != 0) {
          detail::reject_argument<std::invalid_argument>(
              where, "shape", detail::shape_text(s) + " (" + std::to_string(rows) + " stacked rows)",
              "stacked rows that split into " + std::to_string(blocks) + " equal blocks");
        }
        return packed_dense(blocks, l == weight_layout::in_out ? s[0] : s[1], rows / blocks, l);
      }
      case layer_kind::convolution:
      case layer_kind::transposed_convolution: {
        need_rank(3, 5);
        const bool transposed = kind == layer_kind::transposed_convolution;
        const weight_layout l =
            layout.value_or(transposed ? weight_layout::in_out_spatial : weight_layout::out_in_spatial);
        const std::size_t r = s.size();
        std::uint64_t a = 0, b = 0;  // the two channel axes as stored
        std::vector<std::uint64_t> kernel;
        if (l == weight_layout::out_in_spatial || l == weight_layout::in_out_spatial) {
          a = s[0];
          b = s[1];
          kernel.assign(s.begin() + 2, s.end());
        } else if (l == weight_layout::spatial_in_out || l == weight_layout::spatial_out_in) {
          kernel.assign(s.begin(), s.end() - 2);
          a = s[r - 1];  // out (convolution) or in (transposed)
          b = s[r - 2];  // in/g or out/g
        } else if (l == weight_layout::out_spatial_in) {
          a = s[0];
          b = s[r - 1];
          kernel.assign(s.begin() + 1, s.end() - 1);
        } else {
          detail::reject_argument<std::invalid_argument>(where, "layout", std::string(layout_name(l)),
                                                         "a layout of " + what);
        }
        // a is out (convolution) or in (transposed); b holds the other side per group.
        const std::uint64_t other = product(b, groups, "channels per group * groups");
        if (transposed) return transposed_convolution(a, other, kernel, groups, l);
        return convolution(other, a, kernel, groups, l);
      }
    }
    throw std::logic_error("unreachable");
  }
};

/// A rule: a name pattern and what it assigns to the parameters it matches.
struct plan_rule {
  std::string pattern;
  std::optional<layer_template> layer;
  std::optional<scheme_value> scheme;
  std::optional<element_kind> element;
};

/// A parameter as listed before the rules apply: its name and shape, and whatever it
/// gives itself (a full layer, a scheme, an element type), which no rule overrides.
struct parameter_request {
  std::string name;
  std::vector<std::uint64_t> shape;        // may be empty when `layer` is given
  std::optional<layer_description> layer;  // the full layer, sizes included
  std::vector<std::string> gate_order;     // with `layer`, for a packed layer
  std::optional<scheme_value> scheme;
  std::optional<element_kind> element;

  parameter_request() = default;
  parameter_request(std::string n, std::vector<std::uint64_t> s) : name(std::move(n)), shape(std::move(s)) {}
};

namespace detail {

inline std::string rule_label(const std::vector<plan_rule>& rules, std::size_t i) {
  return "rules[" + std::to_string(i) + "] '" + rules[i].pattern + "'";
}

// The index of the most specific rule among `candidates`, or none; a tie at the top is an error.
inline std::optional<std::size_t> most_specific(const std::vector<plan_rule>& rules,
                                                const std::vector<name_pattern>& patterns,
                                                const std::vector<std::size_t>& candidates, const std::string& name,
                                                const char* field) {
  if (candidates.empty()) return std::nullopt;
  std::size_t best = candidates[0];
  for (std::size_t c : candidates) {
    if (patterns[c].compare_specificity(patterns[best]) > 0) best = c;
  }
  std::vector<std::size_t> tied;
  for (std::size_t c : candidates) {
    if (patterns[c].compare_specificity(patterns[best]) == 0) tied.push_back(c);
  }
  if (tied.size() > 1) {
    std::string list;
    for (std::size_t k = 0; k < tied.size(); ++k) {
      list += (k == 0 ? "" : k + 1 == tied.size() ? " and " : ", ") + rule_label(rules, tied[k]);
    }
    const name_pattern& p = patterns[best];
    throw std::invalid_argument("parameter '" + name + "': " + list + (tied.size() == 2 ? " both" : " all") + " set its " + field +
                                " and are equally specific (" + std::to_string(p.literal_characters()) +
                                " literal characters, " + std::to_string(p.double_stars()) + " '**', " +
                                std::to_string(p.single_stars()) +
                                " '*'); expected one most specific rule: add a rule for the exact name, or narrow one pattern");
  }
  return best;
}

}  // namespace detail

/// The plan the rules give `requests` (in their order); the plan is checked whole
/// (check_plan). Errors: see the top of this header.
inline model_plan apply_rules(const std::vector<parameter_request>& requests, const std::vector<plan_rule>& rules) {
  std::vector<name_pattern> patterns;
  for (std::size_t i = 0; i < rules.size(); ++i) {
    try {
      patterns.emplace_back(rules[i].pattern);
    } catch (const std::invalid_argument& e) {
      throw std::invalid_argument(detail::rule_label(rules, i) + ": " + e.what());
    }
    if (!rules[i].layer && !rules[i].scheme && !rules[i].element) {
      throw std::invalid_argument(detail::rule_label(rules, i) +
                                  " sets nothing, expected a layer, a scheme or an element type");
    }
  }
  std::vector<bool> used(rules.size(), false);
  std::set<std::string> names;
  model_plan plan;
  for (const parameter_request& r : requests) {
    if (r.name.empty()) throw std::invalid_argument("a parameter has an empty name, expected a parameter name");
    if (!names.insert(r.name).second) {
      throw std::invalid_argument("parameter '" + r.name + "' appears twice in the plan, expected each name once");
    }
    std::vector<std::size_t> matching, with_layer, with_scheme, with_element;
    for (std::size_t i = 0; i < rules.size(); ++i) {
      if (!patterns[i].matches(r.name)) continue;
      used[i] = true;
      matching.push_back(i);
      if (rules[i].layer) with_layer.push_back(i);
      if (rules[i].scheme) with_scheme.push_back(i);
      if (rules[i].element) with_element.push_back(i);
    }
    const auto matched_text = [&]() {
      if (matching.empty()) return std::string("no rule matches it");
      std::string list;
      for (std::size_t k = 0; k < matching.size(); ++k) list += (k ? ", " : "") + detail::rule_label(rules, matching[k]);
      return "the rules that match it (" + list + ")";
    };
    model_parameter p;
    p.name = r.name;
    if (matching.empty() && !(r.layer && r.scheme)) {
      throw std::invalid_argument("parameter '" + r.name + "': no rule matches it and it does not give " +
                                  (r.layer ? "its scheme" : r.scheme ? "its layer" : "its layer and scheme") +
                                  " itself; expected a rule whose pattern matches '" + r.name + "'");
    }
    if (r.layer) {
      p.layer = *r.layer;
      p.gate_order = r.gate_order;
      if (!r.shape.empty() && p.full_shape() != r.shape) {
        throw std::invalid_argument("parameter '" + r.name + "': shape " + detail::shape_text(r.shape) +
                                    " differs from its layer's " + detail::shape_text(p.full_shape()));
      }
    } else if (const auto rule = detail::most_specific(rules, patterns, with_layer, r.name, "layer")) {
      if (r.shape.empty()) {
        throw std::invalid_argument("parameter '" + r.name + "' has no shape, expected its shape (" +
                                    detail::rule_label(rules, *rule) + " gives only its layer kind)");
      }
      try {
        p.layer = rules[*rule].layer->make(r.shape);
      } catch (const std::exception& e) {
        throw std::invalid_argument("parameter '" + r.name + "' (layer from " + detail::rule_label(rules, *rule) +
                                    "): " + e.what());
      }
      p.gate_order = rules[*rule].layer->order;
    } else {
      throw std::invalid_argument("parameter '" + r.name + "' has no layer: " + matched_text() +
                                  " but none sets a layer; expected a rule with a layer, or the layer in the parameter");
    }
    if (r.scheme) {
      p.scheme = *r.scheme;
    } else if (const auto rule = detail::most_specific(rules, patterns, with_scheme, r.name, "scheme")) {
      p.scheme = *rules[*rule].scheme;
    } else {
      throw std::invalid_argument("parameter '" + r.name + "' has no scheme: " + matched_text() +
                                  " but none sets a scheme; expected a rule with a scheme, or the scheme in the parameter");
    }
    if (r.element) {
      p.element = *r.element;
    } else if (const auto rule = detail::most_specific(rules, patterns, with_element, r.name, "element type")) {
      p.element = *rules[*rule].element;
    }
    detail::check_parameter(p);
    plan.parameters.push_back(std::move(p));
  }
  for (std::size_t i = 0; i < rules.size(); ++i) {
    if (!used[i]) {
      throw std::invalid_argument(detail::rule_label(rules, i) +
                                  " matches no parameter of the plan, expected a pattern that matches at least one name");
    }
  }
  return plan;
}

}  // namespace kindling

#endif  // KINDLING_MODEL_RULES_HPP
