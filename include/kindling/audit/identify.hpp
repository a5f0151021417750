// kindling/audit/identify.hpp: what is this tensor? identify_scheme ranks every
// variance-scaling scheme of the library (Glorot, He, LeCun and the general rule with
// scale 1 or 2), with each fan choice (fan-in, fan-out, fan-average) and each draw
// (uniform, normal, normal truncated at 2σ), by the Kolmogorov–Smirnov distance of
// the values to that candidate's exact CDF. The score is the KS p-value: near 0 for a
// candidate the values cannot come from, uniform on (0, 1) for the true one.
//
// Before the ranking, a tensor is named by its structure when it has one, in this
// order: non-finite; constant; identity (dense eye, or the centre-tap channel identity
// of a convolution) with its gain; delta-orthogonal (every tap but the centre zero, the
// centre orthogonal per group) with its gain; orthogonal (the Gram matrix of the
// shorter side of the unit matrix is gain^2 I) with its gain; sparse (the same k
// nonzeros in every unit).
//
// Orthogonality is judged against a tolerance derived from the element type: rounding
// each entry of gain*Q to a type with unit roundoff u moves every entry of the Gram
// matrix by at most 2u gain^2 (|sum q_a q_b (d_a + d_b)| <= 2u |q_a||q_b|, Cauchy-
// Schwarz); comparing against the estimated gain^2 (the mean diagonal entry) at most
// doubles that, the sum in double and Eigen's QR add about m 2^-53 each, and entries
// below the element type's smallest normal number carry an absolute error of at most
// its subnormal spacing h. So tol = 4u + 8 m 2^-53 + 2 sqrt(m) h / gain^2. A Gaussian
// (or any i.i.d.) matrix passes only if all its normalised off-diagonal Gram entries, each about N(0, 1/m), fall inside +-tol; the floor(n/2)
// disjoint row pairs are independent, so it passes with probability at most
// erf(tol sqrt(m / 2))^floor(n/2). The structure is claimed only when that bound is
// below orthogonal_false_alarm (1e-9); a matrix too small for that is ranked as usual.
//
// The fan-scaled ranking also estimates the gain and the leaky slope. The variance
// estimate is the mean square (every ranked scheme has mean 0), with relative standard
// error sqrt((m4 / m2^2 - 1) / N). When no fixed candidate of a draw has its variance
// within 3.89 standard errors of the estimate (two-sided 1e-4, so a tensor made with a
// default gain gets these extra candidates with probability about 1e-4 per candidate
// variance), the ranking adds, for that draw, the same distribution with the fitted
// variance, named in this order (they fit equally well; the order is a stated prior,
// leaky slopes being the more common reason for a non-default variance):
//   "He <draw>, slope a" on fan-in, a = sqrt(2 / (Var fan_in) - 1), when Var fan_in <= 2
//     (He et al. 2015, Var = 2 / ((1 + a^2) fan_in));
//   "Glorot <draw>, gain g" on fan-average, g = sqrt(Var (fan_in + fan_out) / 2)
//     (Glorot & Bengio 2010 with a gain, common practice);
//   "He <draw>, slope a" on fan-out, when Var fan_out <= 2;
//   "LeCun <draw>, gain g" on fan-in, g = sqrt(Var fan_in), when fan-in has no slope
//     (Var = g^2 / fan_in, the spelling schemes/registry.hpp takes).
// A fixed candidate the three names cover only with a parameter is named the same way
// (scale 2 on fan-average is "Glorot, gain 1.414"; scale 1 on fan-out "He, slope 1").
// Their KS p-values are optimistic (the variance was fitted to the same data, as in
// Lilliefors' test); they rank and name, they do not test.
//
// Order of the ranking: candidates whose variance agrees with the mean square (within
// 3.89 standard errors) first, then the rest; within each, by KS distance.
#ifndef KINDLING_AUDIT_IDENTIFY_HPP
#define KINDLING_AUDIT_IDENTIFY_HPP

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string>
#include <type_traits>
#include <vector>

#include "../schemes/detail/centre_tap.hpp"
#include "conformance.hpp"
#include "detail/centre_split.hpp"
#include "kolmogorov.hpp"

namespace kindling {

/// Largest probability that an i.i.d. (e.g. Gaussian) matrix is named orthogonal.
inline constexpr double orthogonal_false_alarm = 1e-9;

struct scheme_candidate {
  std::string scheme;        // e.g. "He normal"
  std::string fan;           // e.g. "fan-in 512"
  fan_scaled rule;     // the candidate as a rule (scale, basis, draw, cut)
  double ks_statistic = 1;   // D_n to the candidate's CDF
  double score = 0;          // KS p-value
  std::string parameter;     // a fitted gain or slope, e.g. "gain 1.667", "slope 0.2"; "" for a default
  double parameter_value = 0;
  bool variance_fits = true; // its variance is within 3.89 standard errors of the values' mean square
  /// "He normal" or "He normal, slope 0.2".
  std::string name() const { return parameter.empty() ? scheme : scheme + ", " + parameter; }
  std::string text() const { return name() + " with " + fan + " (score " + detail::short_number(score) + ")"; }
};

struct identification {
  std::string structure;                    // "", or "constant 0.5", "sparse, 15 nonzero a unit", "non-finite",
                                            // "identity, gain 1", "centre-tap identity, gain 1",
                                            // "delta-orthogonal, gain 1.41", "orthogonal, gain 1.41"
  double gain = 0;                          // the gain of an identity, delta-orthogonal or orthogonal tensor
  std::vector<scheme_candidate> ranking;    // best first
  /// The best candidate, or nullptr when the tensor was named by its structure.
  const scheme_candidate* best() const noexcept { return ranking.empty() ? nullptr : &ranking.front(); }
};

namespace detail {

// Names a candidate as the registry would spell it (schemes/registry.hpp), so that a
// name identify prints is one --expect and parse_scheme take: He with a slope, Glorot
// or LeCun with a gain (Var W = gain^2 / fan); fan_scaled only for a rule none of them is.
inline void name_candidate(scheme_candidate& c, const fan_scaled& r, const std::string& draw) {
  const auto named = [&](const char* family, const char* what, double value) {
    c.scheme = std::string(family) + " " + draw;
    c.parameter = what == nullptr ? "" : std::string(what) + " " + short_number(value, 4);
    c.parameter_value = what == nullptr ? 0 : value;
  };
  if (r.scale == 2 && r.basis != fan_basis::average) return named("He", nullptr, 0);
  if (r.scale == 1 && r.basis == fan_basis::average) return named("Glorot", nullptr, 0);
  if (r.scale == 1 && r.basis == fan_basis::in) return named("LeCun", nullptr, 0);
  if (r.basis == fan_basis::average) return named("Glorot", "gain", std::sqrt(r.scale));
  if (r.basis == fan_basis::in && r.scale > 2) return named("LeCun", "gain", std::sqrt(r.scale));
  if (r.scale <= 2) return named("He", "slope", std::sqrt(2 / r.scale - 1));  // He et al. 2015
  return named("fan-scaled", "scale", r.scale);
}

inline std::string draw_name(draw_shape d) {
  return d == draw_shape::uniform ? "uniform" : d == draw_shape::normal ? "normal" : "truncated normal";
}

// Unit roundoff of an element type (half its machine epsilon) and its subnormal spacing
// (a bound on the absolute rounding error below the smallest normal number).
template <class E>
struct element_precision {
  static constexpr double roundoff = std::is_same_v<E, double>     ? 0x1p-53
                                     : std::is_same_v<E, float>    ? 0x1p-24
                                     : std::is_same_v<E, float16>  ? 0x1p-11
                                                                   : 0x1p-8;  // bfloat16
  static constexpr double tiny = std::is_same_v<E, double>     ? 0x1p-1074
                                 : std::is_same_v<E, float>    ? 0x1p-149
                                 : std::is_same_v<E, float16>  ? 0x1p-24
                                                               : 0x1p-133;  // bfloat16
};

struct precision {
  double roundoff = 0x1p-53;
  double tiny = 0x1p-1074;
};

// Is the n x m matrix at(a, k) (n <= m) gain^2 times orthonormal rows, for some gain?
// Sets *gain to the estimate. Refuses (false) when the check could not tell an i.i.d.
// matrix from an orthogonal one (see the top of the header).
template <class At>
bool orthogonal_rows(std::uint64_t n, std::uint64_t m, const At& at, const precision& p, double* gain) {
  if (n < 2) return false;
  const auto dot = [&](std::uint64_t a, std::uint64_t b) {
    double sum = 0;
    for (std::uint64_t k = 0; k < m; ++k) sum += at(a, k) * at(b, k);
    return sum;
  };
  double g2 = 0;
  for (std::uint64_t a = 0; a < n; ++a) g2 += dot(a, a);
  g2 /= static_cast<double>(n);
  if (!(g2 > 0)) return false;
  const double md = static_cast<double>(m);
  const double tol = 4 * p.roundoff + 8 * md * 0x1p-53 + 2 * std::sqrt(md) * p.tiny / g2;
  // Power: P(an i.i.d. matrix passes) <= erf(tol sqrt(m/2))^floor(n/2).
  const double log_false_alarm = static_cast<double>(n / 2) * std::log(std::erf(tol * std::sqrt(md / 2)));
  if (!(log_false_alarm < std::log(orthogonal_false_alarm))) return false;
  // Cheap pass first (diagonal, then disjoint pairs), so most non-orthogonal tensors
  // cost O(n m); the full Gram matrix only for a candidate that survives it.
  for (std::uint64_t a = 0; a < n; ++a) {
    if (std::abs(dot(a, a) - g2) > tol * g2) return false;
  }
  for (std::uint64_t a = 0; a + 1 < n; a += 2) {
    if (std::abs(dot(a, a + 1)) > tol * g2) return false;
  }
  for (std::uint64_t a = 0; a < n; ++a) {
    for (std::uint64_t b = a + 1; b < n; ++b) {
      if (std::abs(dot(a, b)) > tol * g2) return false;
    }
  }
  *gain = std::sqrt(g2);
  return true;
}

// The unit matrix (rows x cols, unit-major) is orthogonal on its shorter side.
inline bool orthogonal_units(const gathered& g, const precision& p, double* gain) {
  if (g.rows <= g.cols) {
    return orthogonal_rows(g.rows, g.cols, [&g](std::uint64_t a, std::uint64_t k) { return g.values[a * g.cols + k]; },
                           p, gain);
  }
  return orthogonal_rows(g.cols, g.rows, [&g](std::uint64_t a, std::uint64_t k) { return g.values[k * g.cols + a]; },
                         p, gain);
}

// Dense eye: entry (o, i) is c != 0 when o == i, else exactly 0.
inline bool dense_identity(const gathered& g, double* gain) {
  const double c = g.values[0];
  if (c == 0) return false;
  for (std::uint64_t r = 0; r < g.rows; ++r) {
    for (std::uint64_t j = 0; j < g.cols; ++j) {
      if (g.values[r * g.cols + j] != (r == j ? c : 0.0)) return false;
    }
  }
  *gain = c;
  return true;
}

// The structure of a convolution kernel whose non-centre taps are all zero: "centre-tap
// identity" or "delta-orthogonal", or "" when it is neither; g gathered in `layout`.
inline std::string centre_tap_structure(const gathered& g, const centre_tap_geometry& geo, const shape& global,
                                        weight_layout layout, const precision& p, double* gain) {
  const centre_taps split = split_centre_taps(g, geo, global, layout, true);
  if (split.off_centre != 0) return "";
  const std::vector<double>& centre = split.centre;
  const double c = centre[0];
  bool eye = c != 0 && geo.out_per_group() == geo.in;
  for (std::uint64_t o = 0; o < geo.out && eye; ++o) {
    for (std::uint64_t j = 0; j < geo.in && eye; ++j) eye = centre[o * geo.in + j] == (j == o % geo.in ? c : 0.0);
  }
  if (eye) {
    *gain = c;
    return "centre-tap identity";
  }
  // Each group's (out/g) x in block orthogonal with one common gain.
  const std::uint64_t per = geo.out_per_group();
  double common = 0;
  for (std::uint64_t k = 0; k < geo.groups; ++k) {
    const double* block = centre.data() + k * per * geo.in;
    double gk = 0;
    const bool ok = per <= geo.in
                        ? orthogonal_rows(per, geo.in, [&](std::uint64_t a, std::uint64_t b) { return block[a * geo.in + b]; },
                                          p, &gk)
                        : orthogonal_rows(geo.in, per, [&](std::uint64_t a, std::uint64_t b) { return block[b * geo.in + a]; },
                                          p, &gk);
    if (!ok) return "";
    if (k == 0) common = gk;
    if (std::abs(gk - common) > 4 * p.roundoff * common + 1e-12) return "";
  }
  *gain = common;
  return "delta-orthogonal";
}

// The fitted-variance candidates of one draw (see the top of the header), best first.
inline std::vector<scheme_candidate> fitted_candidates(draw_shape d, double variance, const fans& f) {
  std::vector<scheme_candidate> out;
  const auto add = [&](fan_basis b) {
    scheme_candidate c;
    c.rule = fan_scaled{variance * fan_scaled{1, b, d, 2}.fan(f), b, d, 2};
    name_candidate(c, c.rule, draw_name(d));
    c.fan = fan_text(b, f);
    out.push_back(c);
  };
  const double s_in = variance * static_cast<double>(f.fan_in);
  const double s_out = variance * static_cast<double>(f.fan_out);
  if (s_in <= 2) add(fan_basis::in);  // He on fan-in with a slope
  add(fan_basis::average);            // Glorot with a gain
  if (s_out <= 2) add(fan_basis::out);
  if (s_in > 2) add(fan_basis::in);   // LeCun with a gain
  return out;
}

// Names g by its structure, in the order of the header comment (non-finite, constant,
// identity, centre-tap identity or delta-orthogonal, orthogonal, sparse): true, with
// out->structure (and out->gain) set, when it has one.
inline bool name_structure(const gathered& g, const weight_info& w, const shape& global, const precision& p,
                           identification* out) {
  if (g.non_finite != 0) {
    out->structure = "non-finite: " + non_finite_sentence(g);
    return true;
  }
  const auto [lo, hi] = std::minmax_element(g.values.begin(), g.values.end());
  if (*lo == *hi) {
    out->structure = "constant " + short_number(*lo, 6);
    return true;
  }
  if (g.whole && g.rows > 1 && g.cols > 1) {
    double gain = 0;
    if (is_dense_layout(w.layout) && global.rank() == 2 && dense_identity(g, &gain)) {
      out->structure = "identity, gain " + short_number(gain, 4);
      out->gain = gain;
      return true;
    }
    if (is_convolution_layout(w.layout) && global.rank() >= 3 && global.rank() <= 5) {
      bool geometry_ok = true;
      centre_tap_geometry geo;
      try {
        geo = centre_tap_geometry::of(global, w, "identify_scheme");
      } catch (const std::invalid_argument&) {
        geometry_ok = false;  // fans of another kind of layer: no centre-tap structure to look for
      }
      if (geometry_ok && geo.taps > 1) {
        const std::string what = centre_tap_structure(g, geo, global, w.layout, p, &gain);
        if (!what.empty()) {
          out->structure = what + ", gain " + short_number(gain, 4);
          out->gain = gain;
          return true;
        }
      }
    }
    if (orthogonal_units(g, p, &gain)) {
      out->structure = "orthogonal, gain " + short_number(gain, 4);
      out->gain = gain;
      return true;
    }
  }
  if (g.whole && g.cols > 1) {  // the same number k < cols of nonzeros in every unit: sparse
    std::uint64_t k = 0;
    bool same = true;
    for (std::uint64_t r = 0; r < g.rows && same; ++r) {
      std::uint64_t c = 0;
      for (std::uint64_t j = 0; j < g.cols; ++j) c += g.values[r * g.cols + j] != 0 ? 1 : 0;
      if (r == 0) k = c;
      same = c == k;
    }
    if (same && k * 2 <= g.cols) {
      out->structure = "sparse, " + std::to_string(k) + " nonzero a unit";
      return true;
    }
  }
  return false;
}

// Every fan-scaled candidate for the values, best first (see the header comment): the
// fixed rules of each draw, and the fitted ones for a draw none of them fits.
inline std::vector<scheme_candidate> rank_candidates(std::vector<double> sorted, const fans& f) {
  std::sort(sorted.begin(), sorted.end());
  std::vector<scheme_candidate> ranking;
  // Mean square and its relative standard error, for the variance check and the fitted candidates.
  double m2 = 0, m4 = 0;
  for (double x : sorted) {
    m2 += x * x;
    m4 += x * x * x * x;
  }
  const double n = static_cast<double>(sorted.size());
  m2 /= n;
  m4 /= n;
  const double rel_se = std::sqrt(std::max(m4 / (m2 * m2) - 1, 0.0) / n);
  for (draw_shape d : {draw_shape::uniform, draw_shape::normal, draw_shape::truncated_normal}) {
    bool some_fixed_fits = false;
    for (double scale : {1.0, 2.0}) {
      for (fan_basis b : {fan_basis::in, fan_basis::out, fan_basis::average}) {
        const fan_scaled rule{scale, b, d, 2};
        const declared dd = visit_distribution(rule.distribution(f), [](const auto& x) { return declare(x); });
        scheme_candidate c;
        name_candidate(c, rule, draw_name(d));
        c.fan = fan_text(b, f);
        c.rule = rule;
        c.ks_statistic = ks_statistic_sorted(sorted, [&dd](double x) { return dd.cdf(x); });
        c.variance_fits = std::abs(std::log(m2 / rule.variance(f))) <= 3.89 * rel_se;
        some_fixed_fits = some_fixed_fits || c.variance_fits;
        ranking.push_back(c);
      }
    }
    if (some_fixed_fits || !(m2 > 0) || rel_se == 0) continue;
    for (scheme_candidate& c : fitted_candidates(d, m2, f)) {
      const declared dd = visit_distribution(c.rule.distribution(f), [](const auto& x) { return declare(x); });
      c.ks_statistic = ks_statistic_sorted(sorted, [&dd](double x) { return dd.cdf(x); });
      ranking.push_back(c);
    }
  }
  // Candidates whose variance the mean square rejects go last: the variance test is far
  // more powerful against a wrong scale than the KS distance (a 4% variance error is 7
  // standard errors at 65536 values, yet moves the normal CDF by only 0.005).
  std::stable_sort(ranking.begin(), ranking.end(), [](const scheme_candidate& a, const scheme_candidate& b) {
    if (a.variance_fits != b.variance_fits) return a.variance_fits;
    return a.ks_statistic < b.ks_statistic;
  });
  for (scheme_candidate& c : ranking) c.score = ks_p_value(sorted.size(), c.ks_statistic).p_value;
  return ranking;
}

inline identification identify(const gathered& g, const weight_info& w, const shape& global, const precision& p) {
  identification out;
  if (!name_structure(g, w, global, p, &out)) out.ranking = rank_candidates(g.values, w.fans);
  return out;
}

}  // namespace detail

/// Ranks the candidate schemes for the values of v, a weight with these fans and layout.
template <class E>
identification identify_scheme(const strided_view<E>& v, const weight_info& w) {
  detail::require_fans(w.fans, "identify_scheme");
  using element = std::remove_const_t<E>;
  const detail::precision p{detail::element_precision<element>::roundoff, detail::element_precision<element>::tiny};
  return detail::identify(detail::gather(v, w.layout), w, v.global_shape(), p);
}

/// The same for the weight of a layer description (not a packed one: identify its
/// blocks one by one).
template <class E, class Layer, class = decltype(std::declval<const Layer&>().layer_fans())>
identification identify_scheme(const strided_view<E>& v, const Layer& layer) {
  static_assert(!detail::is_packed<Layer>::value, "identify the blocks of a packed weight one by one");
  return identify_scheme(v, weight_info_of(layer, v.global_shape()));
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_IDENTIFY_HPP
