// kindling/schemes/fan_scaled.hpp: weights whose variance is a scale divided by
// a fan, and the published instances of that rule: Glorot, He and LeCun.
//
//   Var W = scale / n,  n = fan_in, fan_out or (fan_in + fan_out) / 2
//
// drawn from a symmetric uniform (bound sqrt(3 Var W)), a normal (sd sqrt(Var W)) or a
// normal truncated at ±cut of its own σ, with σ corrected so the values drawn have
// variance Var W.
#ifndef KINDLING_SCHEMES_FAN_SCALED_HPP
#define KINDLING_SCHEMES_FAN_SCALED_HPP

#include <cmath>
#include <stdexcept>
#include <string>
#include <type_traits>
#include <variant>

#include "../gain.hpp"
#include "../random/sample.hpp"
#include "scheme.hpp"

namespace kindling {

/// Which fan the variance is divided by.
enum class fan_basis { in, out, average };
/// The distribution the values are drawn from.
enum class draw_shape { uniform, normal, truncated_normal };

inline const char* basis_name(fan_basis b) noexcept {
  switch (b) {
    case fan_basis::in: return "fan-in";
    case fan_basis::out: return "fan-out";
    case fan_basis::average: return "fan-average";
  }
  return "unknown";
}

/// The general rule; the named schemes below are instances.
struct fan_scaled {
  double scale = 1;
  fan_basis basis = fan_basis::in;
  draw_shape draw = draw_shape::normal;
  double cut = 2;  // for truncated_normal: where the underlying normal is cut, in its σ

  std::string name() const { return "fan-scaled"; }

  /// The fan that divides the scale.
  double fan(const fans& f) const noexcept {
    switch (basis) {
      case fan_basis::in: return static_cast<double>(f.fan_in);
      case fan_basis::out: return static_cast<double>(f.fan_out);
      case fan_basis::average:
        return 0.5 * (static_cast<double>(f.fan_in) + static_cast<double>(f.fan_out));
    }
    return 0;
  }
  /// The variance of the values drawn for these fans.
  double variance(const fans& f) const { return scale / fan(f); }

  void check_arguments(const fans& f) const {
    detail::require_positive_argument(scale, "fan_scaled", "scale");
    if (draw == draw_shape::truncated_normal) {
      detail::require_positive_argument(cut, "fan_scaled", "cut");
    }
    detail::require_fans(f, "fan_scaled");
  }
  void check(const shape&, const weight_info& w) const { check_arguments(w.fans); }

  /// The element-wise distribution for these fans.
  std::variant<dist::symmetric_uniform, dist::normal, dist::truncated_normal> distribution(
      const fans& f) const {
    check_arguments(f);
    const double var = variance(f);
    switch (draw) {
      case draw_shape::uniform: return dist::symmetric_uniform{std::sqrt(3 * var)};
      case draw_shape::normal: return dist::normal{0.0, std::sqrt(var)};
      case draw_shape::truncated_normal:
        return dist::truncated_normal{0.0, std::sqrt(var) / truncated_normal_stddev(-cut, cut), -cut, cut};
    }
    return dist::normal{0.0, std::sqrt(var)};
  }

  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    std::visit([&](const auto& d) { fill(v, d, s, domain::values, std::forward<Exec>(exec)); },
               distribution(w.fans));
  }
};

namespace detail {
// The distribution type fan_scaled::distribution() holds for a draw shape.
template <draw_shape D>
struct drawn_distribution {
  using type = dist::normal;
};
template <>
struct drawn_distribution<draw_shape::uniform> {
  using type = dist::symmetric_uniform;
};
template <>
struct drawn_distribution<draw_shape::truncated_normal> {
  using type = dist::truncated_normal;
};

// Shared body of the named instances: each says how it maps to fan_scaled, and names
// its draw shape at compile time (Self::drawn), so that a file initializing with
// he_normal instantiates the fill of the normal only, not of all three shapes that
// fan_scaled::write must be ready for (the same values: the same distribution).
template <class Self>
struct named_scaling {
  void check(const shape& g, const weight_info& w) const { rule().check(g, w); }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    const fan_scaled r = rule();
    using drawn = typename drawn_distribution<Self::drawn>::type;
    fill(v, std::get<drawn>(r.distribution(w.fans)), s, domain::values, std::forward<Exec>(exec));
  }
  auto distribution(const fans& f) const { return rule().distribution(f); }
  double variance(const fans& f) const { return rule().variance(f); }
  fan_scaled rule() const { return static_cast<const Self&>(*this).as_fan_scaled(); }
};

inline double he_scale(double slope) {
  detail::require_finite_argument(slope, "he", "slope");
  return 2.0 / (1.0 + slope * slope);
}

struct glorot_arguments;
struct he_arguments {};  // tag of every he_arguments_of

// The negative slope He et al. derive the variance for: 0 for ReLU, a for a leaky ReLU of
// slope a. Their derivation covers only these rectifiers, so any other activation is refused.
inline double he_slope(const activation& a, const char* scheme) {
  if (a.kind() == activation_kind::relu) return 0;
  if (a.kind() == activation_kind::leaky_relu) return a.parameter();
  detail::reject_argument<std::invalid_argument>(
      scheme, "activation", a.name(),
      "relu or leaky_relu (the rectifiers He et al. derive the variance for); "
      "for another activation use glorot_uniform or glorot_normal with that activation");
}

// Lets a catch-all constructor of the named schemes take what is neither a number nor an
// activation (nor a scheme), only to stop it with a sentence instead of "no matching
// constructor" (see the argument bases below).
template <class T>
using if_neither_number_nor_activation =
    std::enable_if_t<!std::is_arithmetic<T>::value && !std::is_convertible<const T&, activation>::value &&
                         !std::is_base_of<glorot_arguments, T>::value && !std::is_base_of<he_arguments, T>::value,
                     int>;
template <class T>
inline constexpr bool always_false = false;

// The arguments of glorot_uniform and glorot_normal: a gain, or an activation whose gain
// table_gain gives (gain.hpp; e.g. 5/3 for tanh, common practice, sqrt(2) for ReLU).
struct glorot_arguments {
  double gain = 1;
  glorot_arguments() = default;
  explicit glorot_arguments(double g) : gain(g) {}
  explicit glorot_arguments(const activation& a) : gain(table_gain(a).value) {}
  template <class T, if_neither_number_nor_activation<T> = 0>
  explicit glorot_arguments(const T&) {
    static_assert(always_false<T>,
                  "kindling::glorot_uniform and glorot_normal take a gain (a number) or an activation, e.g. "
                  "glorot_uniform{activation::tanh()} or glorot_uniform{table_gain(activation::tanh()).value}");
  }
};

// The arguments of he_uniform and he_normal: the negative slope a of a leaky ReLU (0 for
// ReLU) or the rectifier itself, and the fan (in or out) the variance is divided by.
template <class Self>
struct he_arguments_of : he_arguments {
  double slope = 0;
  fan_basis basis = fan_basis::in;
  he_arguments_of() = default;
  explicit he_arguments_of(double a, fan_basis b = fan_basis::in) : slope(a), basis(b) {}
  explicit he_arguments_of(const activation& a, fan_basis b = fan_basis::in)
      : slope(he_slope(a, Self::type_name)), basis(b) {}
  template <class T, if_neither_number_nor_activation<T> = 0>
  explicit he_arguments_of(const T&) {
    static_assert(always_false<T>,
                  "kindling::he_uniform and he_normal take a negative slope (a number) or a rectifier, e.g. "
                  "he_normal{activation::leaky_relu(0.1)} or he_normal{0.1}");
  }
};
}  // namespace detail

/// Glorot & Bengio (AISTATS 2010, eq. 16): Var W = gain² · 2 / (fan_in + fan_out),
/// uniform on ±gain·sqrt(6 / (fan_in + fan_out)).
struct glorot_uniform : detail::named_scaling<glorot_uniform>, detail::glorot_arguments {
  using glorot_arguments::glorot_arguments;
  static constexpr draw_shape drawn = draw_shape::uniform;
  std::string name() const { return "glorot-uniform"; }
  fan_scaled as_fan_scaled() const {
    detail::require_positive_argument(gain, "glorot_uniform", "gain");
    return {gain * gain, fan_basis::average, drawn, 2};
  }
};

/// Glorot & Bengio 2010 with normal values of the same variance.
struct glorot_normal : detail::named_scaling<glorot_normal>, detail::glorot_arguments {
  using glorot_arguments::glorot_arguments;
  static constexpr draw_shape drawn = draw_shape::normal;
  std::string name() const { return "glorot-normal"; }
  fan_scaled as_fan_scaled() const {
    detail::require_positive_argument(gain, "glorot_normal", "gain");
    return {gain * gain, fan_basis::average, drawn, 2};
  }
};

/// He et al. (ICCV 2015, sec. 2.2): Var W = 2 / ((1 + a²) n), a the negative slope of a
/// leaky or parametric ReLU (0 for ReLU), n the fan-in (keeps the forward signal) or the
/// fan-out (keeps the backward gradient).
struct he_uniform : detail::named_scaling<he_uniform>, detail::he_arguments_of<he_uniform> {
  using he_arguments_of::he_arguments_of;
  static constexpr const char* type_name = "he_uniform";
  static constexpr draw_shape drawn = draw_shape::uniform;
  std::string name() const { return "he-uniform"; }
  fan_scaled as_fan_scaled() const {
    return {detail::he_scale(slope), basis, drawn, 2};
  }
};

struct he_normal : detail::named_scaling<he_normal>, detail::he_arguments_of<he_normal> {
  using he_arguments_of::he_arguments_of;
  static constexpr const char* type_name = "he_normal";
  static constexpr draw_shape drawn = draw_shape::normal;
  std::string name() const { return "he-normal"; }
  fan_scaled as_fan_scaled() const {
    return {detail::he_scale(slope), basis, drawn, 2};
  }
};

/// LeCun et al., "Efficient BackProp" (1998): Var W = 1 / fan_in. With SELU units this
/// is the variance that gives the self-normalizing fixed point (Klambauer et al. 2017).
struct lecun_uniform : detail::named_scaling<lecun_uniform> {
  static constexpr draw_shape drawn = draw_shape::uniform;
  std::string name() const { return "lecun-uniform"; }
  fan_scaled as_fan_scaled() const { return {1, fan_basis::in, drawn, 2}; }
};

struct lecun_normal : detail::named_scaling<lecun_normal> {
  static constexpr draw_shape drawn = draw_shape::normal;
  std::string name() const { return "lecun-normal"; }
  fan_scaled as_fan_scaled() const { return {1, fan_basis::in, drawn, 2}; }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_FAN_SCALED_HPP
