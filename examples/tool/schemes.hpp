// examples/tool/schemes.hpp: a scheme chosen by name on the command line, with its
// arguments (--gain, --std, --value, --nonzero), through the library's scheme registry.
#ifndef KINDLING_TOOL_SCHEMES_HPP
#define KINDLING_TOOL_SCHEMES_HPP

#include <cmath>
#include <limits>
#include <stdexcept>
#include <string>
#include <variant>

#include <kindling/schemes/registry.hpp>

#include "tool.hpp"

namespace kindling::tool {

using any_scheme = scheme_variant;

/// The scheme `a` names, built through the library's registry (schemes/registry.hpp)
/// from the options given: --gain, --std, --value and --nonzero are the registry's
/// arguments gain, std, value and nonzero. --gain on a He or LeCun scheme sets its
/// standard deviation to gain / sqrt(fan) (the scheme's fan, its draw). --std is the
/// standard deviation of uniform (on +-sqrt(3) std), normal, truncated-normal (cut at 2
/// sigma) and of the nonzero weights of sparse. An argument the scheme does not take is
/// an error naming the option.
inline scheme_value make_scheme_value(const scheme_arguments& a) {
  const std::string& s = a.scheme;
  const scheme_entry* e = find_scheme_entry(s);
  if (e == nullptr) throw std::invalid_argument("--scheme '" + s + "' is not a scheme, expected one of " + scheme_names_text());
  const auto refuse = [&](bool given, const char* key, const char* option, const char* expected) {
    if (given && e->argument(key) == nullptr) {
      throw std::invalid_argument(std::string(option) + " does not apply to scheme '" + s + "'; " + expected);
    }
  };
  refuse(a.gain.has_value(), "gain", "--gain", "it applies to the Glorot, He, LeCun, orthogonal and identity schemes");
  refuse(a.stddev.has_value(), "std", "--std", "it applies to uniform, normal, truncated-normal and sparse");
  refuse(a.value.has_value(), "value", "--value", "it applies to constant");
  refuse(a.nonzero.has_value(), "nonzero", "--nonzero", "it applies to sparse");
  const scheme_argument* std_arg = e->argument("std");
  if (std_arg != nullptr && std_arg->required && !a.stddev) {
    throw std::invalid_argument("scheme '" + s + "' needs --std (its standard deviation)");
  }
  if (e->argument("value") != nullptr && !a.value) throw std::invalid_argument("scheme '" + s + "' needs --value");
  // The fan-scaled schemes square the gain (Var W = gain^2 / fan): a gain whose square
  // overflows or vanishes in double is refused here, under the user's own option name.
  if (a.gain) {
    const bool fan_rule = e->argument("gain")->rule == argument_rule::squarable;
    const double gain = *a.gain;
    if (!std::isfinite(gain) || (fan_rule && !(gain > 0 && std::isfinite(gain * gain) &&
                                               gain * gain >= std::numeric_limits<double>::min()))) {
      throw std::invalid_argument("--gain " + number_text(gain, 6) + ": expected a finite number" +
                                  (fan_rule ? std::string(" > 0 whose square (the variance factor of '" + s +
                                                          "') is finite and nonzero, e.g. 1e-150 to 1e150")
                                            : std::string()));
    }
  }
  scheme_arguments_list given;
  const auto give = [&](const std::optional<double>& x, const char* key, const char* option) {
    if (!x) return;
    const argument_rule rule = e->argument(key)->rule;
    if (!detail::rule_holds(rule, *x)) {
      throw std::invalid_argument(std::string(option) + " " + number_text(*x, 6) + ": expected " + detail::rule_text(rule));
    }
    given.emplace_back(key, *x);
  };
  give(a.gain, "gain", "--gain");
  give(a.stddev, "std", "--std");
  give(a.value, "value", "--value");
  if (a.nonzero) give(static_cast<double>(*a.nonzero), "nonzero", "--nonzero");
  return kindling::make_scheme_value(s, given, "--scheme '" + s + "'");
}

inline any_scheme make_scheme(const scheme_arguments& a) { return make_scheme_value(a).variant(); }

/// The largest finite value of the element type --dtype names (f32, f64, f16, bf16).
inline double element_max(const std::string& dtype) {
  if (dtype == "f64") return std::numeric_limits<double>::max();
  if (dtype == "f16") return 65504.0;                       // (2 - 2^-10) * 2^15
  if (dtype == "bf16") return 3.3895313892515355e38;        // (2 - 2^-7) * 2^127
  return static_cast<double>(std::numeric_limits<float>::max());
}

/// Refuses arguments whose values do not fit --dtype: a constant beyond its largest
/// value would be written as +-inf, and an orthogonal or identity gain beyond it would
/// be clamped (no longer orthogonal); a --std beyond it draws mostly infinities.
inline void check_fits_element(const scheme_arguments& a, const std::string& dtype) {
  const double top = element_max(dtype);
  const auto refuse = [&](const char* option, double x, const char* why) {
    throw std::invalid_argument(std::string(option) + " " + number_text(x, 6) + " does not fit --dtype " + dtype +
                                " (largest finite value " + number_text(top, 6) + "): " + why +
                                "; expected a magnitude of at most " + number_text(top, 6));
  };
  const std::string& s = a.scheme;
  if (a.value && !(std::fabs(*a.value) <= top)) refuse("--value", *a.value, "it would be written as infinity");
  if (a.gain && (s == "orthogonal" || s == "identity" || s == "delta-orthogonal") && !(std::fabs(*a.gain) <= top)) {
    refuse("--gain", *a.gain, "the values would be clamped and no longer orthogonal");
  }
  const double spread = s == "uniform" ? std::sqrt(3.0) : 1.0;
  if (a.stddev && !(std::fabs(*a.stddev) * spread <= top)) refuse("--std", *a.stddev, "most values would be infinite");
}

/// The tolerance on Q Q^T = gain^2 I: the orthogonal schemes' cross-build agreement
/// (1e-8 of the gain, README) for f64, and a few units of the element type's rounding
/// for the narrower types (each entry carries a relative rounding error of half an ulp).
inline double orthogonal_tolerance(element_kind t) {
  switch (t) {
    case element_kind::f64: return 1e-8;
    case element_kind::f32: return 1e-5;
    case element_kind::f16: return 4e-3;
    case element_kind::bf16: return 3e-2;
  }
  return 1e-5;
}

/// Whether the scheme divides by a fan (and so needs fans).
inline bool uses_fans(const any_scheme& s) {
  return std::visit([](const auto& sc) { return sc.name() == "fan-scaled" || find_scheme_entry(sc.name())->uses_fans; }, s);
}

}  // namespace kindling::tool

#endif  // KINDLING_TOOL_SCHEMES_HPP
