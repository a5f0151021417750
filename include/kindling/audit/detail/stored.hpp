// kindling/audit/detail/stored.hpp: a declared distribution as kindling stores it in an
// element type E. A value is computed, rounded to E (nearest, ties to even) and, if the
// rounding left the distribution's bounds, moved one step of E back inside
// (element.hpp). So the stored values are a discrete distribution on the values E can
// represent (its atoms), and its CDF jumps at them:
//
//   P(stored <= t) = F(midpoint of t and the next atom above t)   for t inside,
//                  = 0 below the first atom inside, 1 from the last atom inside on,
//
// with F the declared (continuous) CDF: every value between two midpoints rounds to the
// atom between them, and what rounded outside the bounds was moved to the atom next to
// the bound, which the 0 and 1 absorb. The audits test against this CDF and these
// moments, so a correct bfloat16 tensor of 2^24 values (a few thousand distinct
// values) is not rejected for being discrete.
//
// float is treated the same way (its atoms are float values); double is taken as
// continuous (its rounding moves the CDF by about 1e-16, far below anything a sample
// can show). The values are computed in float for float16 and bfloat16 too; that error
// (an ulp of float, 2^-13 of a float16 step) moves the midpoints by an amount no test
// can see and is ignored.
#ifndef KINDLING_AUDIT_DETAIL_STORED_HPP
#define KINDLING_AUDIT_DETAIL_STORED_HPP

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <type_traits>

#include "../../element.hpp"
#include "declared.hpp"

namespace kindling::detail {

template <class E, class = void>
struct has_atoms : std::false_type {};
template <class E>
struct has_atoms<E, std::void_t<decltype(element_codec<E>::sign)>>
    : std::bool_constant<!std::is_same<E, double>::value> {};

// The kindling type whose values an element type holds: E itself, or the type an
// adapter's element forwards to (Eigen::bfloat16 holds kindling::bfloat16's values).
template <class E, class = void>
struct stored_type {
  using type = E;
};
template <class E>
struct stored_type<E, std::void_t<typename element_traits<E>::stored_as>> {
  using type = typename element_traits<E>::stored_as;
};

/// E is the stored element type (float, double, float16, bfloat16, an adapter's type
/// that forwards to one of them, or an adapter's type without a codec, taken as
/// continuous).
template <class Element>
class stored_distribution {
  using E = typename stored_type<Element>::type;

 public:
  explicit stored_distribution(const declared& d) : d_(d) {}

  const declared& continuous() const noexcept { return d_; }

  /// P(stored value < e) for a finite e.
  double below(double e) const {
    if constexpr (!atoms) {
      return d_.cdf(e);
    } else {
      return at_most(largest_atom_below(e));
    }
  }

  /// P(stored value <= x) for a value x the element type holds exactly.
  double at_most_value(double x) const {
    if constexpr (!atoms) {
      return d_.cdf(x);
    } else {
      return at_most(codec::round(static_cast<float>(x)));
    }
  }

  /// The stored distribution's mean, variance and fourth central moment. For float16
  /// and bfloat16 they are summed over the atoms (at most 65536); for float and double
  /// the continuous ones are used: rounding changes the variance by about step²/12
  /// (Sheppard's correction, W. F. Sheppard, Proc. London Math. Soc. 1898; from memory),
  /// a relative 2^-50 for float, which no sample can measure.
  declared_moments moments() const {
    if constexpr (std::is_same<E, float16>::value || std::is_same<E, bfloat16>::value) {
      return atom_moments();
    } else {
      return {d_.mean, d_.variance, d_.fourth};
    }
  }

 private:
  static constexpr bool atoms = has_atoms<E>::value;
  using codec = element_codec<std::conditional_t<atoms, E, float>>;
  using bits = typename codec::bits;

  static bits up(bits b) noexcept { return step_up_bits(b, codec::sign); }
  static bits down(bits b) noexcept { return step_down_bits(b, codec::sign); }

  // The largest atom strictly below e (e finite): round e into E, then step.
  static bits largest_atom_below(double e) {
    bits a = codec::round(static_cast<float>(e));
    while (codec::value(a) >= e) a = down(a);
    for (;;) {
      const bits next = up(a);
      if (!(codec::value(next) < e)) break;
      a = next;
    }
    return a;
  }

  // P(stored <= value of atom a).
  double at_most(bits a) const {
    const double t = codec::value(a);
    if (std::isnan(t)) return 0.0;
    const double next = codec::value(up(a));
    if (side_of(t, d_.bounds) < 0) return 0.0;
    if (!(next == next) || side_of(next, d_.bounds) > 0) return 1.0;
    return std::min(1.0, std::max(0.0, d_.cdf(t + (next - t) / 2)));
  }

  // Moments over the atoms of the stored distribution: its support is inside the bounds,
  // and for an unbounded normal within 9 sigma (beyond, the mass is below 1e-18).
  //
  // The atoms closer to zero than tiny = 2^-20 sigma are summed as one atom at zero
  // (when the support reaches past both -tiny and tiny): their total mass is exact (the
  // CDF at the run's two ends), their positions are off by less than tiny, which moves
  // the mean by less than 2^-20 sigma times that mass (itself below 2^-19) and the
  // variance by less than a relative 2^-38: nothing a sample of any size measures.
  // Without it a bfloat16 normal visits about 32000 atoms, four in five of them in the
  // binades between 2^-20 sigma and the smallest subnormal, and those CDF evaluations
  // were an eighth of a whole-checkpoint audit (bench/RESULTS.md).
  declared_moments atom_moments() const {
    const double lo = std::isinf(d_.bounds.lo) ? d_.mean - 9 * d_.stddev() : d_.bounds.lo;
    const double hi = std::isinf(d_.bounds.hi) ? d_.mean + 9 * d_.stddev() : d_.bounds.hi;
    const double tiny = std::ldexp(d_.stddev(), -20);
    bool lump = tiny > 0 && lo < -tiny && hi > tiny;
    double s1 = 0, s2 = 0, s3 = 0, s4 = 0, mass = 0;
    double previous = at_most(largest_atom_below(lo));
    for (bits a = up(largest_atom_below(lo)); codec::value(a) <= hi; a = up(a)) {
      double at = codec::value(a);
      if (lump && at >= -tiny) {  // atoms a .. the largest below tiny, as one atom at zero
        a = largest_atom_below(tiny);
        at = 0.0;
        lump = false;
      }
      const double c = at_most(a);
      const double p = c - previous, x = at - d_.mean;  // around the declared mean
      previous = c;
      if (p <= 0) continue;
      mass += p;
      s1 += p * x;
      s2 += p * x * x;
      s3 += p * x * x * x;
      s4 += p * x * x * x * x;
    }
    s1 /= mass, s2 /= mass, s3 /= mass, s4 /= mass;
    const double variance = s2 - s1 * s1;
    const double fourth = s4 - 4 * s1 * s3 + 6 * s1 * s1 * s2 - 3 * s1 * s1 * s1 * s1;
    return {d_.mean + s1, variance, fourth};
  }

  declared d_;
};

}  // namespace kindling::detail

#endif  // KINDLING_AUDIT_DETAIL_STORED_HPP
