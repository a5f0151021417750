// kindling/audit/conformance.hpp: does a tensor follow the distribution it claims?
//
// check_distribution(view, distribution) and check_scheme(view, layer, scheme) test the
// values against the declared distribution *as kindling stores it* in the view's
// element type (detail/stored.hpp: rounded to bfloat16, float16, float or double, kept
// inside the bounds), a discrete distribution for the 16-bit types. The checks:
//   - finite:   every value is a number (NaN and infinities are reported, and the
//               statistical checks are then not run: they would mean nothing);
//   - bounds:   every value lies inside the declared interval (not statistical);
//   - ks:       Kolmogorov–Smirnov against the stored CDF. bfloat16 and float16 values
//               are counted by bit pattern, so the statistic is exact
//               (ks_statistic_atoms); float values by the top 16 bits of their pattern,
//               bins of relative width 2^-7 whose edges are exact floats, and double
//               values into a grid of 16 sqrt(n) bins (ks_statistic_binned: the
//               statistic of the grouped values, at most the ungrouped one, lower by
//               at most one bin's mass, under 0.004 for float). The p-value from
//               Kolmogorov's distribution is conservative for grouped values and a
//               discrete null, so a correct tensor fails less often than alpha says;
//   - mean:     the sample mean against the stored mean, z = (m - μ) / (s' / √n) with
//               s' the larger of the sample's and the declared standard deviation, so
//               a pure scale error fails the variance check alone;
//   - variance: the sample variance s² against the stored σ², with the exact variance
//               of s², Var s² = μ4 / n - σ⁴ (n - 3) / (n (n - 1)) (Cramér, Mathematical
//               Methods of Statistics, 1946, 27.4; from memory), and a normal z.
// All of it comes from one pass over the view (detail/tally.hpp): no copy, no sort,
// memory bounded by the counts (2^16 keys or at most 2^16 bins, two 32-bit counts a key
// for each task), and the same verdict bit for bit on any executor.
// The significance level alpha (default 0.001) is the family-wise false-alarm rate:
// each of the three statistical checks runs at alpha / 3 (Bonferroni), so a correct
// tensor fails at most at rate alpha, and a fixed seed always gives the same verdict.
// 0.001 is the default because a unit test suite runs many such checks, and wrong fans
// by a factor of two still fail with certainty for 10^4 values (tests/audit).
#ifndef KINDLING_AUDIT_CONFORMANCE_HPP
#define KINDLING_AUDIT_CONFORMANCE_HPP

#include <algorithm>
#include <cmath>
#include <limits>
#include <optional>
#include <string>
#include <type_traits>
#include <utility>
#include <variant>
#include <vector>

#include "../detail/dmath.hpp"
#include "../schemes/scheme.hpp"
#include "../schemes/fan_scaled.hpp"
#include "../schemes/detail/unit_matrix.hpp"
#include "detail/declared.hpp"
#include "detail/gather.hpp"
#include "detail/stored.hpp"
#include "detail/tally.hpp"
#include "kolmogorov.hpp"
#include "result.hpp"

namespace kindling {

/// Settings every audit shares.
struct audit_options {
  double alpha = 1e-3;                          // family-wise significance level
  weight_layout layout = weight_layout::out_in;  // for views checked without a layer
};

namespace detail {

inline void check_alpha(double alpha, const char* audit) {
  if (!(alpha > 0 && alpha < 1)) {
    throw std::domain_error(std::string("kindling::") + audit + ": argument 'alpha' = " +
                            argument_text(alpha) + ", expected a significance level in (0, 1)");
  }
}

inline double two_sided_p(double z) { return 2 * normal_cdf(-std::fabs(z)); }
inline double two_sided_quantile(double alpha) { return -normal_quantile(alpha / 2); }

// The interval's level, 4 significant digits, or more where 4 would round a level
// below 100% up to "100%" (alpha = 1e-4 split over three checks is 99.9967%).
inline std::string percent_text(double alpha) {
  const double level = 100 * (1 - alpha);
  std::string text = short_number(level, 4);
  for (int digits = 5; text == "100" && level < 100 && digits <= 17; ++digits) text = short_number(level, digits);
  return text + "%";
}

// Human form of a scheme name: "he-normal" -> "He normal".
// In the compiled library in that mode (detail/compiled_mode.hpp).
KINDLING_COMPILED_INLINE std::string display_name(const std::string& name);
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE std::string display_name(const std::string& name) {
  std::string text = name;
  std::replace(text.begin(), text.end(), '-', ' ');
  const std::pair<const char*, const char*> proper[] = {{"glorot", "Glorot"}, {"lecun", "LeCun"},
                                                        {"he ", "He "}, {"delta ", "delta-"}};
  for (const auto& p : proper) {
    const std::string from = p.first;
    if (text.compare(0, from.size(), from) == 0) text = p.second + text.substr(from.size());
  }
  return text;
}
#endif

// What the variance says about the fan, when the scheme is a variance-scaling rule.
struct fan_hint {
  double scale = 1;
  fan_basis basis = fan_basis::in;
  kindling::fans fans;
};

// In the compiled library in that mode (detail/compiled_mode.hpp).
KINDLING_COMPILED_INLINE std::string fan_text(fan_basis b, const fans& f);
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE std::string fan_text(fan_basis b, const fans& f) {
  const fan_scaled rule{1, b, draw_shape::normal, 2};
  std::string text = std::string(basis_name(b)) + " " + short_number(rule.fan(f), 6);
  if (b == fan_basis::average) {
    text += " (fan-in " + std::to_string(f.fan_in) + ", fan-out " + std::to_string(f.fan_out) + ")";
  }
  return text;
}
#endif

// The moments of a sample: mean, unbiased variance, fourth central moment.
struct sample_moments {
  double mean = 0, variance = 0, fourth = 0;
};
inline sample_moments moments_of(const std::vector<double>& x) {
  sample_moments m;
  const double n = static_cast<double>(x.size());
  long double sum = 0;
  for (double v : x) sum += v;
  m.mean = static_cast<double>(sum / x.size());
  long double s2 = 0, s4 = 0;
  for (double v : x) {
    const long double d = v - m.mean;
    s2 += d * d;
    s4 += d * d * d * d;
  }
  m.variance = x.size() > 1 ? static_cast<double>(s2 / (n - 1)) : 0.0;
  m.fourth = static_cast<double>(s4 / n);
  return m;
}

// The grid the values are counted on: the declared support (an unbounded normal cut at
// 8.5 sigma, beyond which a float Box–Muller never reaches and a double one with
// probability 2e-17), in 16 sqrt(n) bins (a power of two between 1024 and 2^16), so one
// bin holds at most about a fifth of the Kolmogorov–Smirnov critical distance
// 1.9 / sqrt(n) (a normal's bin mass is at most 0.4 * 17 / bins). Grouping lowers D by at
// most one bin's mass, so the power lost is that small; the variance check, not KS, is
// what catches a wrong fan.
inline value_grid grid_for(const declared& d, std::uint64_t n) {
  double lo = d.a, hi = d.b;
  if (d.family != declared_family::uniform) {
    const double cut_lo = d.family == declared_family::normal ? -8.5 : std::max(d.cut_lo, -8.5);
    const double cut_hi = d.family == declared_family::normal ? 8.5 : std::min(d.cut_hi, 8.5);
    lo = d.a + d.b * cut_lo;
    hi = d.a + d.b * cut_hi;
  }
  const double wanted = 16 * std::sqrt(static_cast<double>(n));
  std::uint32_t bins = 1024;
  while (bins < wanted && bins < (std::uint32_t{1} << 16)) bins *= 2;
  return value_grid(lo, hi, bins);
}

// Where a value is, in words: its flat index, and its unit and connection when the
// view is a whole weight ("flat index 70 (unit 1, connection 6)"); with units_only, just
// the part in parentheses when there is one.
template <class E>
std::string position_text(const strided_view<E>& v, weight_layout layout, std::uint64_t local,
                          bool units_only = false) {
  const std::uint64_t flat = global_flat_index(v, local);
  const std::string index = "flat index " + std::to_string(flat);
  if (!v.is_whole()) return index;
  std::uint64_t row = 0, col = 0;
  unit_matrix(v.global_shape(), layout).locate(flat, &row, &col);
  const std::string unit = "unit " + std::to_string(row) + ", connection " + std::to_string(col);
  return units_only ? unit : index + " (" + unit + ")";
}

inline std::string non_finite_text(const value_tally& t, const std::string& where) {
  const chunk_tally& c = t.totals;
  const double x = c.first_non_finite_value;
  const std::string first = std::isnan(x) ? "NaN" : (x > 0 ? "+infinity" : "-infinity");
  return std::to_string(c.non_finite) + " of " + std::to_string(t.n) + " values are not finite (" +
         std::to_string(c.nan_count) + " NaN, " + std::to_string(c.non_finite - c.nan_count) +
         " infinite; the first, " + first + ", at " + where + ")";
}

inline std::string interval_text(const element_bounds& b) {
  return std::string(b.lo_open ? "(" : "[") + short_number(b.lo, 6) + ", " + short_number(b.hi, 6) +
         (b.hi_open ? ")" : "]");
}

// The sample's moments from the tally's sums around the declared mean.
inline sample_moments moments_of(const value_tally& t, double shift) {
  const double n = static_cast<double>(t.n);
  const chunk_tally& c = t.totals;
  const double a = c.sum1 / n;  // mean - shift
  sample_moments m;
  m.mean = shift + a;
  m.variance = t.n > 1 ? std::max(0.0, (c.sum2 - c.sum1 * a) / (n - 1)) : 0.0;
  m.fourth = c.sum4 / n - 4 * a * c.sum3 / n + 6 * a * a * c.sum2 / n - 3 * a * a * a * a;
  return m;
}

// What each statistical check needs: the sample, the stored distribution's moments,
// the level of each check.
struct conformance_input {
  const declared& d;
  declared_moments stored;
  sample_moments sample;
  std::uint64_t n;
  double alpha, each;
  const std::string& subject;
};

inline audit_finding ks_finding(const conformance_input& in, double statistic) {
  const ks_result ks = ks_p_value(in.n, statistic);
  const double critical = ks_critical_value(in.n, in.each);
  audit_finding f{"ks", ks.p_value >= in.each, "", ks.statistic, ks.p_value, 0.0, critical};
  const std::string text = "Kolmogorov-Smirnov D = " + short_number(ks.statistic) + " over " + std::to_string(in.n) +
                           " values, p = " + short_number(ks.p_value);
  if (f.passed) {
    f.sentence = text + " against " + in.subject;
    return f;
  }
  f.sentence = "the values do not follow " + in.subject + ", " + in.d.text() + ": " + text + " is below " +
               short_number(in.each) + " (alpha " + short_number(in.alpha) + " over 3 checks)";
  if (in.sample.variance > 0 && in.n >= 4) {
    const double kurt = in.sample.fourth / (in.sample.variance * in.sample.variance);
    const double want = in.stored.fourth / (in.stored.variance * in.stored.variance);
    f.sentence += "; their kurtosis is " + short_number(kurt) + " against the " + short_number(want) +
                  " of the declared shape";
  }
  return f;
}

// The mean is tested with the larger of the sample's and the declared standard
// deviation: under the declared distribution that is at least the true one (a
// conservative z), and a tensor whose only fault is its scale does not fail the mean.
inline audit_finding mean_finding(const conformance_input& in) {
  const double rn = static_cast<double>(in.n);
  const double se = std::max(std::sqrt(in.sample.variance), std::sqrt(in.stored.variance)) / std::sqrt(rn);
  const double z = (in.sample.mean - in.stored.mean) / se;
  const double half = two_sided_quantile(in.each) * se;
  const double lo = in.stored.mean - half, hi = in.stored.mean + half;
  audit_finding f{"mean", two_sided_p(z) >= in.each, "", z, two_sided_p(z), lo, hi};
  const std::string around = "[" + short_number(lo) + ", " + short_number(hi) + "]";
  f.sentence = f.passed ? "mean " + short_number(in.sample.mean) + " lies inside " + around
                        : "mean " + short_number(in.sample.mean) + " lies outside " + around + ", the " +
                              percent_text(in.each) + " interval around the " + short_number(in.stored.mean) +
                              " expected for " + in.subject + " with " + std::to_string(in.n) + " values";
  return f;
}

// Which fan would give the variance seen? Prefer one of this layer's fans, then a
// power-of-two multiple of the declared fan (the usual mistake), else the fan itself.
inline std::string fan_match(const fan_hint& hint, double variance, double half, double declared_variance) {
  for (fan_basis b : {fan_basis::in, fan_basis::out, fan_basis::average}) {
    const fan_scaled rule{hint.scale, b, draw_shape::normal, 2};
    if (b != hint.basis && std::fabs(rule.variance(hint.fans) - variance) <= half) {
      return "; the value matches " + fan_text(b, hint.fans) + " of this layer";
    }
  }
  // The fans consistent with the variance seen (its interval scaled to it).
  const double seen_half = half * variance / declared_variance;
  const double fan_lo = hint.scale / (variance + seen_half);
  const double fan_hi =
      variance > seen_half ? hint.scale / (variance - seen_half) : std::numeric_limits<double>::infinity();
  const double declared_fan = fan_scaled{hint.scale, hint.basis, draw_shape::normal, 2}.fan(hint.fans);
  const char* basis = basis_name(hint.basis);
  for (double factor : {0.5, 2.0, 0.25, 4.0, 0.125, 8.0}) {
    const double candidate = declared_fan * factor;
    if (candidate >= fan_lo && candidate <= fan_hi) {
      return "; the value matches " + std::string(basis) + " " + short_number(candidate, 6) + " (" +
             (factor < 1 ? "1/" + short_number(1 / factor) : short_number(factor)) + " times the declared)";
    }
  }
  return "; the value matches " + std::string(basis) + " " + short_number(hint.scale / variance, 4) +
         " (interval [" + short_number(fan_lo, 4) + ", " + short_number(fan_hi, 4) + "])";
}

// The sample variance s² against the stored distribution's, with the exact variance of
// s², Var s² = mu4 / n - sigma^4 (n - 3) / (n (n - 1)) (Cramér, Mathematical Methods of
// Statistics, 1946, 27.4; from memory, checked by simulation in tests/audit), as a normal z;
// reported as a standard deviation.
inline audit_finding variance_finding(const conformance_input& in, const fan_hint* hint) {
  const double rn = static_cast<double>(in.n);
  const double v = in.stored.variance;
  const double var_se = std::sqrt(std::max(0.0, in.stored.fourth / rn - v * v * (rn - 3) / (rn * (rn - 1))));
  const double z = (in.sample.variance - v) / var_se;
  const double half = two_sided_quantile(in.each) * var_se;
  const double lo = std::sqrt(std::max(0.0, v - half)), hi = std::sqrt(v + half);
  const double sd = std::sqrt(in.sample.variance), want = std::sqrt(v);
  audit_finding f{"variance", two_sided_p(z) >= in.each, "", z, two_sided_p(z), lo, hi};
  if (f.passed) {
    f.sentence = "standard deviation " + short_number(sd) + " lies inside [" + short_number(lo) + ", " +
                 short_number(hi) + "]";
    return f;
  }
  f.sentence = "standard deviation " + short_number(sd) + " is " + short_number(sd / want) + "x the " +
               short_number(want) + " expected for " + in.subject + " (" + percent_text(in.each) + " interval [" +
               short_number(lo) + ", " + short_number(hi) + "])";
  if (hint != nullptr && in.sample.variance > 0) f.sentence += fan_match(*hint, in.sample.variance, half, v);
  return f;
}

// The conformance checks of view v (element type E, as stored) against d, in one pass
// over v on executor exec.
template <class E, class Exec>
audit_report conformance(const strided_view<E>& v, weight_layout layout, const declared& d, double alpha,
                         const std::string& subject, const fan_hint* hint, const Exec& exec) {
  using element = std::remove_const_t<E>;
  const stored_distribution<element> stored(d);
  // 16-bit values are counted by bit pattern (exact sums and an exact statistic), the
  // others into the grid (conservative statistic).
  pattern_tally patterns;
  std::optional<value_grid> grid;
  value_tally t;
  if constexpr (counted_by_pattern<element>) {
    patterns = count_patterns(v, d.mean, exec);
    t = tally_from_patterns(v, patterns, d.mean, d.bounds);
  } else {
    grid.emplace(grid_for(d, v.size()));
    t = tally_values(v, *grid, d.mean, d.bounds, exec);
  }
  const std::uint64_t n = t.n;
  audit_report report(subject);
  if (t.totals.non_finite != 0) {
    report.add({"finite", false,
                non_finite_text(t, position_text(v, layout, t.totals.first_non_finite)) +
                    "; the statistical checks against " + subject + " were not run"});
    return report;
  }
  report.add({"finite", true, "all " + std::to_string(n) + " values are finite"});
  const std::string interval = interval_text(d.bounds);
  if (t.totals.outside != 0) {
    report.add({"bounds", false, std::to_string(t.totals.outside) + " of " + std::to_string(n) +
                                     " values lie outside " + interval + ", the bounds of " + subject +
                                     "; the farthest is " + short_number(t.totals.farthest, 6) + " (" +
                                     position_text(v, layout, t.totals.farthest_at, true) + ")"});
  } else {
    report.add({"bounds", true, "every value lies inside " + interval});
  }

  double statistic = 0;
  if constexpr (std::is_same<element, float>::value) {
    std::vector<std::uint64_t> ordered(patterns.counts.size());  // the keys' bins in the order of the line
    for (std::uint32_t key = 0; key < ordered.size(); ++key) ordered[float_key_position(key)] = patterns.counts[key];
    statistic = ks_statistic_binned(ordered, n, [&](std::uint32_t q) { return float_below_position(stored, q); });
    if (ks_p_value(n, statistic).p_value < alpha / 3) add_higher_sums(v, d.mean, t.totals);  // the kurtosis it quotes
  } else if constexpr (counted_by_pattern<element>) {
    statistic = ks_statistic_atoms(
        distinct_values<element>(patterns.counts), n, [&](double x) { return stored.below(x); },
        [&](double x) { return stored.at_most_value(x); });
  } else {
    statistic = ks_statistic_binned(t.counts, n, [&](std::uint32_t j) { return stored.below(grid->edge(j)); });
    if (ks_p_value(n, statistic).p_value < alpha / 3) add_higher_sums(v, d.mean, t.totals);  // the kurtosis it quotes
  }
  const conformance_input in{d, stored.moments(), moments_of(t, d.mean), n, alpha, alpha / 3, subject};
  report.add(ks_finding(in, statistic));
  report.add(mean_finding(in));
  if (n >= 2) report.add(variance_finding(in, hint));
  return report;
}

// The serial pass of every element type, const or not: in compiled mode
// (detail/compiled_mode.hpp) instantiated once, in the compiled library, and only declared
// in users' files (PREFIX `extern template` there, `template` in the library), so a
// file that audits a tensor does not compile the pass again.
#define KINDLING_CONFORMANCE_INSTANCE(PREFIX, E)                                                      \
  PREFIX audit_report conformance<E, serial_executor>(const strided_view<E>&, weight_layout,         \
                                                      const declared&, double, const std::string&,    \
                                                      const fan_hint*, const serial_executor&);
#define KINDLING_AUDIT_INSTANCES(INSTANCE, PREFIX)                                                    \
  INSTANCE(PREFIX, const float) INSTANCE(PREFIX, const double) INSTANCE(PREFIX, const float16)        \
  INSTANCE(PREFIX, const bfloat16) INSTANCE(PREFIX, float) INSTANCE(PREFIX, double)                   \
  INSTANCE(PREFIX, float16) INSTANCE(PREFIX, bfloat16)
#if defined(KINDLING_COMPILED)
KINDLING_AUDIT_INSTANCES(KINDLING_CONFORMANCE_INSTANCE, extern template)
#endif

template <class T>
struct is_variant : std::false_type {};
template <class... T>
struct is_variant<std::variant<T...>> : std::true_type {};

template <class D, class F>
auto visit_distribution(const D& d, F&& f) {
  if constexpr (is_variant<D>::value) {
    return std::visit(std::forward<F>(f), d);
  } else {
    return f(d);
  }
}

template <class S, class = void>
struct has_rule : std::false_type {};
template <class S>
struct has_rule<S, std::void_t<decltype(std::declval<const S&>().rule())>> : std::true_type {};

template <class Scheme>
bool scaling_rule_of(const Scheme& scheme, fan_scaled* out) {
  if constexpr (std::is_same<Scheme, fan_scaled>::value) {
    *out = scheme;
    return true;
  } else if constexpr (has_rule<Scheme>::value) {
    *out = scheme.rule();
    return true;
  } else {
    (void)scheme;
    (void)out;
    return false;
  }
}

template <class Scheme>
std::string scheme_subject(const Scheme& scheme, const fans& f) {
  fan_scaled rule;
  if (scaling_rule_of(scheme, &rule)) {
    return display_name(scheme.name()) + " with " + fan_text(rule.basis, f);
  }
  return display_name(scheme.name());
}

}  // namespace detail

/// Checks that the values of v follow distribution d (dist::uniform,
/// dist::symmetric_uniform, dist::normal or dist::truncated_normal) as stored in v's
/// element type. The view may be a region of its tensor. `subject` names the claim in
/// sentences (default: d's text). One pass over v on executor exec (any executor, the
/// same verdict bit for bit).
template <class E, class D, class Exec = serial_executor>
audit_report check_distribution(const strided_view<E>& v, const D& d, const audit_options& options = {},
                                std::string subject = "", const Exec& exec = Exec{}) {
  detail::check_alpha(options.alpha, "check_distribution");
  const detail::declared declared = detail::declare(d);
  if (subject.empty()) subject = declared.text();
  return detail::conformance(v, options.layout, declared, options.alpha, subject, nullptr, exec);
}

/// Checks that v holds what `scheme` draws for a weight with these fans and layout.
/// Works for every scheme with distribution(fans) (variance scaling, Glorot, He,
/// LeCun, fixed); when the scheme is a variance-scaling rule, a wrong standard
/// deviation is explained by the fan that would give it.
template <class E, class Scheme, class Exec = serial_executor>
audit_report check_scheme(const strided_view<E>& v, const weight_info& w, const Scheme& scheme,
                          const audit_options& options = {}, const Exec& exec = Exec{}) {
  static_assert(detail::has_distribution<Scheme>::value, "kindling::check_scheme needs a scheme with distribution(fans); "
                "for orthogonal or delta_orthogonal use check_orthogonal or check_delta_orthogonal (audit/structure.hpp)");
  detail::check_alpha(options.alpha, "check_scheme");
  scheme.check(v.global_shape(), w);
  const std::string subject = detail::scheme_subject(scheme, w.fans);
  const detail::declared declared =
      detail::visit_distribution(scheme.distribution(w.fans), [](const auto& d) { return detail::declare(d); });
  fan_scaled rule;
  detail::fan_hint hint;
  const bool scaling = detail::scaling_rule_of(scheme, &rule);
  if (scaling) hint = detail::fan_hint{rule.scale, rule.basis, w.fans};
  return detail::conformance(v, w.layout, declared, options.alpha, subject, scaling ? &hint : nullptr, exec);
}

/// The same for the weight of a layer description (dense, convolution, embedding, ...):
/// its shape is checked against the layer and its fans come from the layer. A packed
/// layer (LSTM, GRU) is checked block by block, each with its own fans.
template <class E, class Layer, class Scheme, class Exec = serial_executor,
          class = decltype(std::declval<const Layer&>().layer_fans())>
audit_report check_scheme(const strided_view<E>& v, const Layer& layer, const Scheme& scheme,
                          const audit_options& options = {}, const Exec& exec = Exec{}) {
  static_assert(detail::has_distribution<Scheme>::value, "kindling::check_scheme needs a scheme with distribution(fans); "
                "for orthogonal or delta_orthogonal use check_orthogonal or check_delta_orthogonal (audit/structure.hpp)");
  const weight_layout layout = weight_info_of(layer, v.global_shape()).layout;  // checks the shape
  if constexpr (detail::is_packed<Layer>::value) {
    if (!v.is_whole()) {
      throw std::invalid_argument("kindling::check_scheme: argument 'view' holds only a region of a packed "
                                  "weight; expected the whole weight");
    }
    audit_report report(detail::display_name(scheme.name()) + " on each block");
    const std::vector<packed_block> blocks = layer.all_blocks();
    audit_options each = options;  // the blocks share the family-wise level (Bonferroni)
    each.alpha = options.alpha / static_cast<double>(blocks.size());
    for (const packed_block& b : blocks) {
      strided_view<E> part = v;
      packed_block_view(v, b, &part);
      // Each block is a weight of its own; its sentences say which block.
      const audit_report one = check_scheme(part, weight_info{b.block_fans, layout}, scheme, each, exec);
      for (audit_finding f : one.findings()) {
        f.sentence = "block " + std::to_string(b.index) + ": " + f.sentence;
        report.add(f);
      }
    }
    return report;
  } else {
    return check_scheme(v, weight_info{layer.layer_fans(), layout}, scheme, options, exec);
  }
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_CONFORMANCE_HPP
