// kindling/schemes/registry.hpp: a scheme as a value, and the one table of scheme names
// and the arguments each takes.
//
// The tool, its network-spec reader (examples/tool/spec.hpp) and model plans (io/plan.hpp) all
// name schemes by text, e.g. "he-normal" or "glorot-uniform(gain=1.5)". They all go
// through scheme_registry(), so a name means the same scheme everywhere.
//
//   scheme_value s = parse_scheme("glorot-uniform(gain=1.5)");
//   initialize(view, dense(256, 128), s, make_stream(seed, "fc.weight"));
//   s.text();   // "glorot-uniform(gain=1.5)"
//
// A scheme_value carries its resolved arguments: defaults filled in, every value
// checked. Its text lists the arguments that differ from their defaults (so the text of
// an argument-free scheme is just its name) with 17 significant digits, so that
// parse_scheme(s.text()) == s. Needs Eigen (the orthogonal schemes).
#ifndef KINDLING_SCHEMES_REGISTRY_HPP
#define KINDLING_SCHEMES_REGISTRY_HPP

#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <limits>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <utility>
#include <variant>
#include <vector>

#include "constant.hpp"
#include "fixed.hpp"
#include "identity.hpp"
#include "orthogonal.hpp"
#include "sparse.hpp"
#include "fan_scaled.hpp"

namespace kindling {

/// Every scheme a registry name can stand for.
using scheme_variant = std::variant<zeros, constant, fixed_uniform, fixed_normal, fixed_truncated_normal,
                                    glorot_uniform, glorot_normal, he_uniform, he_normal, lecun_uniform,
                                    lecun_normal, fan_scaled, orthogonal, identity, delta_orthogonal, sparse>;

/// What values an argument accepts.
enum class argument_rule {
  finite,      // any finite number
  positive,    // a finite number > 0
  squarable,   // > 0 with a finite, normal square (a gain that becomes Var W = gain^2 / fan)
  count,       // a whole number from 1 to 2^53
};

/// One argument a scheme takes. Without a default, an optional argument is simply absent.
struct scheme_argument {
  const char* key;
  argument_rule rule;
  bool required;
  std::optional<double> default_value;
};

/// The resolved arguments of a scheme, in the order its registry entry lists them.
using scheme_arguments_list = std::vector<std::pair<std::string, double>>;

/// One row of the registry: a name, its arguments, whether it divides by a fan, and how
/// to build the scheme from resolved arguments.
struct scheme_entry {
  const char* name;
  std::vector<scheme_argument> arguments;
  bool uses_fans;
  scheme_variant (*make)(const scheme_arguments_list&);

  const scheme_argument* argument(std::string_view key) const {
    for (const scheme_argument& a : arguments) {
      if (key == a.key) return &a;
    }
    return nullptr;
  }
};

namespace detail {

inline std::optional<double> find_argument(const scheme_arguments_list& args, std::string_view key) {
  for (const auto& [k, v] : args) {
    if (k == key) return v;
  }
  return std::nullopt;
}

// He and LeCun with a gain: Var W = gain^2 / fan, drawn as the scheme draws.
template <class S>
scheme_variant scaled_or_plain(const S& scheme, const scheme_arguments_list& a) {
  const std::optional<double> gain = find_argument(a, "gain");
  if (!gain) return scheme;
  fan_scaled rule = scheme.rule();
  rule.scale = *gain * *gain;
  return rule;
}

inline double sqrt3() { return std::sqrt(3.0); }

}  // namespace detail

/// The registry: a constant table, built once on first use and never changed.
inline const std::vector<scheme_entry>& scheme_registry() {
  using R = argument_rule;
  using L = scheme_arguments_list;
  using detail::find_argument;
  const scheme_argument std_required{"std", R::positive, true, std::nullopt};
  const scheme_argument gain_one{"gain", R::squarable, false, 1.0};
  const scheme_argument gain_optional{"gain", R::squarable, false, std::nullopt};
  const scheme_argument gain_finite{"gain", R::finite, false, 1.0};
  const scheme_argument slope{"slope", R::finite, false, 0.0};
  static const std::vector<scheme_entry> table{
      {"zeros", {}, false, [](const L&) -> scheme_variant { return zeros{}; }},
      {"constant", {{"value", R::finite, true, std::nullopt}}, false,
       [](const L& a) -> scheme_variant { return constant{*find_argument(a, "value")}; }},
      // uniform on +-sqrt(3) std, so that its standard deviation is std
      {"uniform", {std_required}, false,
       [](const L& a) -> scheme_variant {
         const double s = *find_argument(a, "std");
         return fixed_uniform{-detail::sqrt3() * s, detail::sqrt3() * s};
       }},
      {"normal", {std_required}, false,
       [](const L& a) -> scheme_variant { return fixed_normal{0.0, *find_argument(a, "std")}; }},
      {"truncated-normal", {std_required}, false,
       [](const L& a) -> scheme_variant { return fixed_truncated_normal{0.0, *find_argument(a, "std"), 2.0}; }},
      {"glorot-uniform", {gain_one}, true,
       [](const L& a) -> scheme_variant { return glorot_uniform{*find_argument(a, "gain")}; }},
      {"glorot-normal", {gain_one}, true,
       [](const L& a) -> scheme_variant { return glorot_normal{*find_argument(a, "gain")}; }},
      {"he-uniform", {gain_optional, slope}, true,
       [](const L& a) { return detail::scaled_or_plain(he_uniform{*find_argument(a, "slope")}, a); }},
      {"he-normal", {gain_optional, slope}, true,
       [](const L& a) { return detail::scaled_or_plain(he_normal{*find_argument(a, "slope")}, a); }},
      {"lecun-uniform", {gain_optional}, true, [](const L& a) { return detail::scaled_or_plain(lecun_uniform{}, a); }},
      {"lecun-normal", {gain_optional}, true, [](const L& a) { return detail::scaled_or_plain(lecun_normal{}, a); }},
      {"orthogonal", {gain_finite}, false,
       [](const L& a) -> scheme_variant { return orthogonal{*find_argument(a, "gain")}; }},
      {"identity", {gain_finite}, false,
       [](const L& a) -> scheme_variant { return identity{*find_argument(a, "gain")}; }},
      {"delta-orthogonal", {gain_finite}, false,
       [](const L& a) -> scheme_variant { return delta_orthogonal{*find_argument(a, "gain")}; }},
      {"sparse", {{"nonzero", R::count, false, 15.0}, {"std", R::positive, false, 1.0}}, false,
       [](const L& a) -> scheme_variant {
         sparse s;
         s.nonzero = static_cast<std::uint64_t>(*find_argument(a, "nonzero"));
         s.stddev = *find_argument(a, "std");
         return s;
       }},
  };
  return table;
}

/// The registry's names, joined by ", " (for messages).
inline std::string scheme_names_text() {
  std::string s;
  for (const scheme_entry& e : scheme_registry()) s += (s.empty() ? "" : ", ") + std::string(e.name);
  return s;
}

/// The entry of `name`, or nullptr.
inline const scheme_entry* find_scheme_entry(std::string_view name) {
  for (const scheme_entry& e : scheme_registry()) {
    if (name == e.name) return &e;
  }
  return nullptr;
}

/// A scheme with its resolved arguments. It is a scheme itself (check, write, name), so
/// initialize() takes it as it takes any scheme.
class scheme_value {
 public:
  scheme_value(const scheme_entry* entry, scheme_arguments_list arguments)
      : entry_(entry), arguments_(std::move(arguments)), scheme_(entry->make(arguments_)) {}

  std::string name() const { return entry_->name; }
  const scheme_entry& entry() const { return *entry_; }
  const scheme_arguments_list& arguments() const { return arguments_; }
  std::optional<double> argument(std::string_view key) const { return detail::find_argument(arguments_, key); }
  const scheme_variant& variant() const { return scheme_; }
  bool uses_fans() const { return entry_->uses_fans; }

  /// "he-normal", "glorot-uniform(gain=1.5)": the arguments that differ from their defaults.
  std::string text() const {
    std::string args;
    for (const auto& [key, value] : arguments_) {
      const scheme_argument* a = entry_->argument(key);
      if (a->default_value && *a->default_value == value) continue;
      args += (args.empty() ? "" : ",") + key + "=" + detail::argument_text(value);
    }
    return args.empty() ? name() : name() + "(" + args + ")";
  }

  void check(const shape& global, const weight_info& w) const {
    std::visit([&](const auto& s) { s.check(global, w); }, scheme_);
  }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    std::visit([&](const auto& sc) { sc.write(v, w, s, std::forward<Exec>(exec)); }, scheme_);
  }

  friend bool operator==(const scheme_value& a, const scheme_value& b) {
    return a.entry_ == b.entry_ && a.arguments_ == b.arguments_;
  }
  friend bool operator!=(const scheme_value& a, const scheme_value& b) { return !(a == b); }

 private:
  const scheme_entry* entry_;
  scheme_arguments_list arguments_;
  scheme_variant scheme_;
};

namespace detail {

inline std::string rule_text(argument_rule r) {
  switch (r) {
    case argument_rule::finite: return "a finite number";
    case argument_rule::positive: return "a finite number > 0";
    case argument_rule::squarable: return "a number > 0 whose square is finite and nonzero, e.g. 1e-150 to 1e150";
    case argument_rule::count: return "a whole number from 1 to 2^53";
  }
  return "a number";
}

inline bool rule_holds(argument_rule r, double x) {
  switch (r) {
    case argument_rule::finite: return std::isfinite(x);
    case argument_rule::positive: return std::isfinite(x) && x > 0;
    case argument_rule::squarable:
      return std::isfinite(x) && x > 0 && std::isfinite(x * x) && x * x >= std::numeric_limits<double>::min();
    case argument_rule::count: return x >= 1 && x <= 9007199254740992.0 && std::floor(x) == x;
  }
  return false;
}

}  // namespace detail

/// The scheme `name` with the `given` arguments, checked against the registry: an unknown
/// name, an argument the scheme does not take, a repeated or missing one, or a value
/// outside its rule is std::invalid_argument, "<what>: kindling::make_scheme_value:
/// argument '<key>' = <value>, expected <what was>", `what` being the user's key or
/// option (e.g. "layers[2].scheme").
inline scheme_value make_scheme_value(const std::string& name, const scheme_arguments_list& given,
                                      const std::string& what = "scheme") {
  // `what` (the user's key) stands before the message, as a plan's parameter name does.
  const auto reject = [&](const std::string& key, const std::string& value, const std::string& expected) {
    throw std::invalid_argument(what + ": " +
                                detail::argument_message("kindling::make_scheme_value", key, value, expected));
  };
  const scheme_entry* e = find_scheme_entry(name);
  if (e == nullptr) reject("name", "'" + name + "'", "a scheme, one of " + scheme_names_text());
  for (std::size_t i = 0; i < given.size(); ++i) {
    const std::string& key = given[i].first;
    const std::string value = detail::argument_text(given[i].second);
    const scheme_argument* a = e->argument(key);
    if (a == nullptr) {
      std::string keys;
      for (const scheme_argument& k : e->arguments) keys += (keys.empty() ? "" : ", ") + std::string(k.key);
      reject(key, value,
             "an argument of scheme '" + name + "': " + (keys.empty() ? "it takes none" : "one of " + keys));
    }
    for (std::size_t j = 0; j < i; ++j) {
      if (given[j].first == key) reject(key, value, "one value for scheme '" + name + "' (the argument is given twice)");
    }
    if (!detail::rule_holds(a->rule, given[i].second)) {
      reject(key, value, detail::rule_text(a->rule) + " for scheme '" + name + "'");
    }
  }
  scheme_arguments_list resolved;
  for (const scheme_argument& a : e->arguments) {
    std::optional<double> v = detail::find_argument(given, a.key);
    if (!v) v = a.default_value;
    if (!v && a.required) {
      reject(a.key, "(none)", detail::rule_text(a.rule) + ": scheme '" + name + "' needs argument '" + a.key + "'");
    }
    if (v) resolved.emplace_back(a.key, *v);
  }
  return scheme_value(e, std::move(resolved));
}

/// Parses "name" or "name(key=value,key=value)" (spaces allowed around the parts).
/// Errors are std::invalid_argument naming `what` and the text.
inline scheme_value parse_scheme(const std::string& text, const std::string& what = "scheme") {
  const auto trim = [](std::string s) {
    const std::size_t a = s.find_first_not_of(" \t");
    if (a == std::string::npos) return std::string();
    return s.substr(a, s.find_last_not_of(" \t") - a + 1);
  };
  const auto bad = [&](const std::string& why) {
    return std::invalid_argument(
        what + ": " +
        detail::argument_message("kindling::parse_scheme", "text", "'" + text + "'",
                                 "a scheme name, optionally with arguments, e.g. glorot-uniform(gain=1.5) (" + why + ")"));
  };
  const std::size_t open = text.find('(');
  const std::string name = trim(text.substr(0, open));
  if (name.empty()) throw bad("no scheme name");
  scheme_arguments_list given;
  if (open != std::string::npos) {
    if (text.back() != ')' && trim(text).back() != ')') throw bad("no closing ')'");
    const std::size_t close = text.rfind(')');
    if (trim(text.substr(close + 1)) != "" || close < open) throw bad("text after ')'");
    const std::string inside = text.substr(open + 1, close - open - 1);
    std::size_t start = 0;
    while (start <= inside.size()) {
      const std::size_t comma = inside.find(',', start);
      const std::string part = trim(inside.substr(start, comma == std::string::npos ? std::string::npos : comma - start));
      const std::size_t eq = part.find('=');
      if (eq == std::string::npos) throw bad("argument '" + part + "' is not key=value");
      const std::string key = trim(part.substr(0, eq)), number = trim(part.substr(eq + 1));
      char* end = nullptr;
      const double x = number.empty() ? 0.0 : std::strtod(number.c_str(), &end);
      if (key.empty() || number.empty() || end != number.c_str() + number.size()) {
        throw bad("argument '" + part + "' is not key=number");
      }
      given.emplace_back(key, x);
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
  }
  return make_scheme_value(name, given, what);
}

}  // namespace kindling

#endif  // KINDLING_SCHEMES_REGISTRY_HPP
