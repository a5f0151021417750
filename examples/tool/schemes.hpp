// examples/tool/schemes.hpp: a scheme chosen by name on the command line, with its
// arguments (--gain, --std, --value, --nonzero), as one value of a std::variant.
#ifndef KINDLING_TOOL_SCHEMES_HPP
#define KINDLING_TOOL_SCHEMES_HPP

#include <cmath>
#include <limits>
#include <stdexcept>
#include <string>
#include <variant>

#include <kindling/schemes/constant.hpp>
#include <kindling/schemes/fixed.hpp>
#include <kindling/schemes/identity.hpp>
#include <kindling/schemes/orthogonal.hpp>
#include <kindling/schemes/sparse.hpp>
#include <kindling/schemes/fan_scaled.hpp>

#include "tool.hpp"

namespace kindling::tool {

using any_scheme = std::variant<zeros, constant, fixed_uniform, fixed_normal, fixed_truncated_normal, glorot_uniform,
                                glorot_normal, he_uniform, he_normal, lecun_uniform, lecun_normal, fan_scaled,
                                orthogonal, identity, delta_orthogonal, sparse>;

/// The scheme `a` names. --gain on a He or LeCun scheme sets its standard deviation to
/// gain / sqrt(fan) (the scheme's fan, its draw). --std is the standard deviation of
/// uniform (on ±sqrt(3) std), normal, truncated-normal (cut at 2 sigma) and of the
/// nonzero weights of sparse. An argument the scheme does not take is an error.
inline any_scheme make_scheme(const scheme_arguments& a) {
  const std::string& s = a.scheme;
  const auto refuse = [&](bool given, const char* option, const char* expected) {
    if (given) throw std::invalid_argument(std::string(option) + " does not apply to scheme '" + s + "'; " + expected);
  };
  const bool fixed = s == "uniform" || s == "normal" || s == "truncated-normal";
  const bool gained = s.rfind("glorot-", 0) == 0 || s.rfind("he-", 0) == 0 || s.rfind("lecun-", 0) == 0 ||
                      s == "orthogonal" || s == "identity" || s == "delta-orthogonal";
  bool known = false;
  for (const std::string& n : scheme_names()) known = known || n == s;
  if (!known) {
    std::string list;
    for (const std::string& n : scheme_names()) list += (list.empty() ? "" : ", ") + n;
    throw std::invalid_argument("--scheme '" + s + "' is not a scheme, expected one of " + list);
  }
  refuse(a.gain && !gained, "--gain", "it applies to the Glorot, He, LeCun, orthogonal and identity schemes");
  refuse(a.stddev && !fixed && s != "sparse", "--std", "it applies to uniform, normal, truncated-normal and sparse");
  refuse(a.value && s != "constant", "--value", "it applies to constant");
  refuse(a.nonzero && s != "sparse", "--nonzero", "it applies to sparse");
  if (fixed && !a.stddev) throw std::invalid_argument("scheme '" + s + "' needs --std (its standard deviation)");
  if (s == "constant" && !a.value) throw std::invalid_argument("scheme 'constant' needs --value");
  const double gain = a.gain.value_or(1.0);
  const bool fan_rule = gained && s != "orthogonal" && s != "identity" && s != "delta-orthogonal";
  // The fan-scaled schemes square the gain (Var W = gain^2 / fan): a gain whose square
  // overflows or vanishes in double is refused here, under the user's own option name,
  // rather than deep in the library under an internal one.
  if (a.gain && (!std::isfinite(gain) || (fan_rule && !(gain > 0 && std::isfinite(gain * gain) &&
                                                        gain * gain >= std::numeric_limits<double>::min())))) {
    throw std::invalid_argument("--gain " + number_text(gain, 6) + ": expected a finite number" +
                                (fan_rule ? std::string(" > 0 whose square (the variance factor of '" + s +
                                                        "') is finite and nonzero, e.g. 1e-150 to 1e150")
                                          : std::string()));
  }
  const auto scaled = [&](fan_scaled rule) -> any_scheme {
    if (!a.gain) return rule;
    rule.scale = gain * gain;
    return rule;
  };
  if (s == "zeros") return zeros{};
  if (s == "constant") return constant{*a.value};
  if (s == "uniform") return fixed_uniform{-std::sqrt(3.0) * *a.stddev, std::sqrt(3.0) * *a.stddev};
  if (s == "normal") return fixed_normal{0.0, *a.stddev};
  if (s == "truncated-normal") return fixed_truncated_normal{0.0, *a.stddev, 2.0};
  if (s == "glorot-uniform") return glorot_uniform{gain};
  if (s == "glorot-normal") return glorot_normal{gain};
  if (s == "he-uniform") return a.gain ? scaled(he_uniform{}.rule()) : any_scheme(he_uniform{});
  if (s == "he-normal") return a.gain ? scaled(he_normal{}.rule()) : any_scheme(he_normal{});
  if (s == "lecun-uniform") return a.gain ? scaled(lecun_uniform{}.rule()) : any_scheme(lecun_uniform{});
  if (s == "lecun-normal") return a.gain ? scaled(lecun_normal{}.rule()) : any_scheme(lecun_normal{});
  if (s == "orthogonal") return orthogonal{gain};
  if (s == "identity") return identity{gain};
  if (s == "delta-orthogonal") return delta_orthogonal{gain};
  sparse sp;
  if (a.nonzero) sp.nonzero = *a.nonzero;
  if (a.stddev) sp.stddev = *a.stddev;
  return sp;
}

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

/// Whether the scheme divides by a fan (and so needs fans).
inline bool uses_fans(const any_scheme& s) {
  return std::holds_alternative<glorot_uniform>(s) || std::holds_alternative<glorot_normal>(s) ||
         std::holds_alternative<he_uniform>(s) || std::holds_alternative<he_normal>(s) ||
         std::holds_alternative<lecun_uniform>(s) || std::holds_alternative<lecun_normal>(s) ||
         std::holds_alternative<fan_scaled>(s);
}

}  // namespace kindling::tool

#endif  // KINDLING_TOOL_SCHEMES_HPP
