// kindling/audit/detail/declared.hpp: a declared element distribution (the four of
// random/sample.hpp) as the audits need it: its CDF, mean, variance, fourth central
// moment, bounds and a short text.
#ifndef KINDLING_AUDIT_DETAIL_DECLARED_HPP
#define KINDLING_AUDIT_DETAIL_DECLARED_HPP

#include <algorithm>
#include <cmath>
#include <string>

#include "../../detail/dmath.hpp"
#include "../../element.hpp"
#include "../../random/detail/instruction_set.hpp"
#include "../../random/sample.hpp"
#include "../result.hpp"

namespace kindling::detail {

// Phi for the audits, which evaluate it thousands of times a tensor (the stored
// distribution's atoms). A portable x86-64 build has no fused multiply-add instruction,
// so each of normal_cdf's std::fma is a call into libm (about 35 an evaluation); the copy
// below is the same steps (normal_cdf_steps, dmath.hpp) built for CPUs with FMA, where
// each is one instruction. std::fma is correctly rounded either way: the same bits
// (tests/audit/detail/declared.cpp). The value path keeps normal_cdf itself.
#if defined(KINDLING_LANES_X86)
__attribute__((target("fma"), flatten)) inline double normal_cdf_fma(double x) noexcept {
  return normal_cdf_steps(x);
}
#endif

inline double audit_normal_cdf(double x) noexcept {
#if defined(KINDLING_LANES_X86)
  static const bool fma = __builtin_cpu_supports("fma");  // a constant of the process
  if (fma) return normal_cdf_fma(x);
#endif
  return normal_cdf(x);
}

enum class declared_family { uniform, normal, truncated_normal };

struct declared {
  declared_family family = declared_family::normal;
  double a = 0, b = 1;            // uniform: [a, b); normal and truncated: mean, sigma
  double cut_lo = 0, cut_hi = 0;  // truncated: cuts in units of sigma
  double mass = 1, phi_lo = 0;    // truncated: Φ(cut_hi) - Φ(cut_lo), Φ(cut_lo)
  double mean = 0, variance = 1, fourth = 3;  // fourth central moment
  element_bounds bounds = unbounded;

  double cdf(double x) const {
    switch (family) {
      case declared_family::uniform: return std::min(1.0, std::max(0.0, (x - a) / (b - a)));
      case declared_family::normal: return audit_normal_cdf((x - a) / b);
      case declared_family::truncated_normal: {
        const double z = (x - a) / b;
        if (z <= cut_lo) return 0.0;
        if (z >= cut_hi) return 1.0;
        return std::min(1.0, std::max(0.0, (audit_normal_cdf(z) - phi_lo) / mass));
      }
    }
    return 0.0;
  }
  double stddev() const { return std::sqrt(variance); }

  std::string text() const {
    switch (family) {
      case declared_family::uniform: return "U(" + short_number(a) + ", " + short_number(b) + ")";
      case declared_family::normal: return "N(" + short_number(a) + ", " + short_number(b) + "²)";
      case declared_family::truncated_normal:
        return "N(" + short_number(a) + ", " + short_number(b) + "²) cut to [" + short_number(cut_lo) +
               "σ, " + short_number(cut_hi) + "σ]";
    }
    return "";
  }
};

struct declared_moments {
  double mean, variance, fourth;  // fourth central moment
};

// The frame every declare() shares: validate d first, then the family and its parameters
// a, b, the moments that `moments(r)` returns (it may set the family's own fields of r
// first) and d's element bounds.
template <class D, class Moments>
declared declare_with(const D& d, declared_family family, double a, double b, Moments moments) {
  validate(d);
  declared r;
  r.family = family;
  r.a = a;
  r.b = b;
  const declared_moments m = moments(r);
  r.mean = m.mean;
  r.variance = m.variance;
  r.fourth = m.fourth;
  r.bounds = bounds_of(d);
  return r;
}

// Each distribution's declaration: defined below in the header-only mode, in the
// compiled library otherwise (detail/compiled_mode.hpp).
KINDLING_COMPILED_INLINE declared declare(const dist::uniform& d);
KINDLING_COMPILED_INLINE declared declare(const dist::symmetric_uniform& d);
KINDLING_COMPILED_INLINE declared declare(const dist::normal& d);
KINDLING_COMPILED_INLINE declared declare(const dist::truncated_normal& d);

#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE declared declare(const dist::uniform& d) {
  return declare_with(d, declared_family::uniform, d.lo, d.hi, [&](declared&) {
    const double w = d.hi - d.lo;
    // uniform: Var = w²/12, μ4 = w⁴/80 (standard formulas)
    return declared_moments{0.5 * (d.lo + d.hi), w * w / 12, w * w * w * w / 80};
  });
}
KINDLING_COMPILED_INLINE declared declare(const dist::symmetric_uniform& d) {
  dist::validate(d);  // its own message (naming 'bound'), not the uniform's it becomes
  declared r = declare(dist::uniform{-d.bound, d.bound});
  r.bounds = bounds_of(d);
  return r;
}
KINDLING_COMPILED_INLINE declared declare(const dist::normal& d) {
  return declare_with(d, declared_family::normal, d.mean, d.stddev, [&](declared&) {
    const double variance = d.stddev * d.stddev;
    return declared_moments{d.mean, variance, 3 * variance * variance};
  });
}
// Raw moments of the standard normal cut to [lo, hi] by the recurrence
// m_k = (k-1) m_{k-2} - (hi^{k-1} φ(hi) - lo^{k-1} φ(lo)) / Z (integration by parts;
// Johnson, Kotz & Balakrishnan, Continuous Univariate Distributions vol. 1, ch. 13).
KINDLING_COMPILED_INLINE declared declare(const dist::truncated_normal& d) {
  return declare_with(d, declared_family::truncated_normal, d.mean, d.stddev, [&](declared& r) {
    r.cut_lo = d.cut_lo;
    r.cut_hi = d.cut_hi;
    r.phi_lo = std::isinf(d.cut_lo) ? 0.0 : normal_cdf(d.cut_lo);
    r.mass = (std::isinf(d.cut_hi) ? 1.0 : normal_cdf(d.cut_hi)) - r.phi_lo;
    auto edge = [&](int power) {  // hi^p φ(hi) - lo^p φ(lo), zero at infinite cuts
      const double h = std::isinf(d.cut_hi) ? 0.0 : std::pow(d.cut_hi, power) * normal_pdf(d.cut_hi);
      const double l = std::isinf(d.cut_lo) ? 0.0 : std::pow(d.cut_lo, power) * normal_pdf(d.cut_lo);
      return (h - l) / r.mass;
    };
    const double m1 = -edge(0);
    const double m2 = 1 - edge(1);
    const double m3 = 2 * m1 - edge(2);
    const double m4 = 3 * m2 - edge(3);
    const double var = m2 - m1 * m1;
    const double c4 = m4 - 4 * m1 * m3 + 6 * m1 * m1 * m2 - 3 * m1 * m1 * m1 * m1;
    return declared_moments{d.mean + d.stddev * m1, d.stddev * d.stddev * var,
                            std::pow(d.stddev, 4) * c4};
  });
}
#endif  // KINDLING_COMPILED_DEFINITIONS

}  // namespace kindling::detail

#endif  // KINDLING_AUDIT_DETAIL_DECLARED_HPP
