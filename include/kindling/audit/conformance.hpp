// kindling/audit/conformance.hpp: does a tensor follow the distribution it claims?
//
// check_distribution(view, distribution) and check_scheme(view, layer, scheme) run
//   - finite:   every value is a number (NaN and infinities are reported, and the
//               statistical checks are then not run: they would mean nothing);
//   - bounds:   every value lies inside the declared interval (not statistical);
//   - ks:       Kolmogorov–Smirnov against the exact CDF (kolmogorov.hpp);
//   - mean:     the sample mean against the declared mean, z = (m - μ) / (σ / √n);
//   - variance: the sample variance s² against σ², with the exact variance of s²,
//               Var s² = μ4 / n - σ⁴ (n - 3) / (n (n - 1)) (Cramér, Mathematical
//               Methods of Statistics, 1946, 27.4; from memory), and a normal z.
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
#include <string>
#include <type_traits>
#include <utility>
#include <variant>
#include <vector>

#include "../detail/dmath.hpp"
#include "../schemes/scheme.hpp"
#include "../schemes/variance_scaling.hpp"
#include "detail/declared.hpp"
#include "detail/gather.hpp"
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

inline std::string percent_text(double alpha) {
  return short_number(100 * (1 - alpha), 4) + "%";
}

// Human form of a scheme name: "he-normal" -> "He normal".
inline std::string display_name(const std::string& name) {
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

// What the variance says about the fan, when the scheme is a variance-scaling rule.
struct fan_hint {
  double scale = 1;
  fan_basis basis = fan_basis::in;
  kindling::fans fans;
};

inline std::string fan_text(fan_basis b, const fans& f) {
  const fan_scaled rule{1, b, draw_shape::normal, 2};
  std::string text = std::string(basis_name(b)) + " " + short_number(rule.fan(f), 6);
  if (b == fan_basis::average) {
    text += " (fan-in " + std::to_string(f.fan_in) + ", fan-out " + std::to_string(f.fan_out) + ")";
  }
  return text;
}

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

inline bool outside(double x, const element_bounds& b) {
  return x < b.lo || x > b.hi || (b.lo_open && x == b.lo) || (b.hi_open && x == b.hi);
}

inline audit_report conformance(const gathered& g, const declared& d, double alpha, const std::string& subject,
                                const fan_hint* hint) {
  audit_report report(subject);
  const std::uint64_t n = g.values.size();
  if (g.non_finite != 0) {
    report.add({"finite", false, non_finite_sentence(g) + "; the statistical checks against " + subject +
                                     " were not run"});
    return report;
  }
  report.add({"finite", true, "all " + std::to_string(n) + " values are finite"});

  // Bounds.
  std::uint64_t out = 0, worst_at = 0;
  double worst = 0;
  for (std::size_t i = 0; i < g.values.size(); ++i) {
    const double x = g.values[i];
    if (outside(x, d.bounds)) {
      const double excess = std::max(d.bounds.lo - x, x - d.bounds.hi);
      if (out == 0 || excess > std::max(d.bounds.lo - worst, worst - d.bounds.hi)) {
        worst = x;
        worst_at = i;
      }
      ++out;
    }
  }
  const std::string interval = std::string(d.bounds.lo_open ? "(" : "[") + short_number(d.bounds.lo, 6) + ", " +
                               short_number(d.bounds.hi, 6) + (d.bounds.hi_open ? ")" : "]");
  if (out != 0) {
    report.add({"bounds", false, std::to_string(out) + " of " + std::to_string(n) + " values lie outside " +
                                     interval + ", the bounds of " + subject + "; the farthest is " +
                                     short_number(worst, 6) + " (unit " + std::to_string(worst_at / g.cols) +
                                     ", connection " + std::to_string(worst_at % g.cols) + ")"});
  } else {
    report.add({"bounds", true, "every value lies inside " + interval});
  }

  const double each = alpha / 3;  // Bonferroni over ks, mean and variance
  const sample_moments m = moments_of(g.values);
  const double rn = static_cast<double>(n);

  // Kolmogorov–Smirnov.
  {
    const ks_result ks = ks_test(g.values, [&d](double x) { return d.cdf(x); });
    audit_finding f{"ks", ks.p_value >= each, "", ks.statistic, ks.p_value};
    std::string text = "Kolmogorov-Smirnov D = " + short_number(ks.statistic) + " over " + std::to_string(n) +
                       " values, p = " + short_number(ks.p_value);
    if (f.passed) {
      f.sentence = text + " against " + subject;
    } else {
      f.sentence = "the values do not follow " + subject + ", " + d.text() + ": " + text + " is below " +
                   short_number(each) + " (alpha " + short_number(alpha) + " over 3 checks)";
      if (m.variance > 0 && n >= 4) {
        const double kurt = m.fourth / (m.variance * m.variance);
        const double want = d.fourth / (d.variance * d.variance);
        f.sentence += "; their kurtosis is " + short_number(kurt) + " against the " + short_number(want) +
                      " of the declared shape";
      }
    }
    report.add(f);
  }

  // Mean.
  {
    const double se = d.stddev() / std::sqrt(rn);
    const double z = (m.mean - d.mean) / se;
    const double half = two_sided_quantile(each) * se;
    audit_finding f{"mean", two_sided_p(z) >= each, "", z, two_sided_p(z)};
    const std::string around = "[" + short_number(d.mean - half) + ", " + short_number(d.mean + half) + "]";
    f.sentence = f.passed ? "mean " + short_number(m.mean) + " lies inside " + around
                          : "mean " + short_number(m.mean) + " lies outside " + around + ", the " +
                                percent_text(each) + " interval around the " + short_number(d.mean) +
                                " expected for " + subject + " with " + std::to_string(n) + " values";
    report.add(f);
  }

  // Variance, reported as a standard deviation.
  if (n >= 2) {
    const double var_se = std::sqrt(std::max(
        0.0, d.fourth / rn - d.variance * d.variance * (rn - 3) / (rn * (rn - 1))));
    const double z = (m.variance - d.variance) / var_se;
    const double half = two_sided_quantile(each) * var_se;
    const double lo = std::sqrt(std::max(0.0, d.variance - half)), hi = std::sqrt(d.variance + half);
    const double sd = std::sqrt(m.variance), want = d.stddev();
    audit_finding f{"variance", two_sided_p(z) >= each, "", z, two_sided_p(z)};
    if (f.passed) {
      f.sentence = "standard deviation " + short_number(sd) + " lies inside [" + short_number(lo) + ", " +
                   short_number(hi) + "]";
    } else {
      f.sentence = "standard deviation " + short_number(sd) + " is " + short_number(sd / want) + "x the " +
                   short_number(want) + " expected for " + subject + " (" + percent_text(each) + " interval [" +
                   short_number(lo) + ", " + short_number(hi) + "])";
      if (hint != nullptr && m.variance > 0) {
        // Which fan would give the variance seen? Prefer one of this layer's fans.
        std::string match;
        for (fan_basis b : {fan_basis::in, fan_basis::out, fan_basis::average}) {
          const fan_scaled rule{hint->scale, b, draw_shape::normal, 2};
          if (b != hint->basis && std::fabs(rule.variance(hint->fans) - m.variance) <= half) {
            match = "; the value matches " + fan_text(b, hint->fans) + " of this layer";
            break;
          }
        }
        if (match.empty()) {
          // The fans consistent with the variance seen (its interval scaled to it); a
          // power-of-two multiple of the declared fan inside it is the usual mistake.
          const double seen_half = half * m.variance / d.variance;
          const double fan_lo = hint->scale / (m.variance + seen_half);
          const double fan_hi = m.variance > seen_half ? hint->scale / (m.variance - seen_half)
                                                       : std::numeric_limits<double>::infinity();
          const double declared_fan = fan_scaled{hint->scale, hint->basis, draw_shape::normal, 2}.fan(hint->fans);
          const char* basis = basis_name(hint->basis);
          for (double factor : {0.5, 2.0, 0.25, 4.0, 0.125, 8.0}) {
            const double candidate = declared_fan * factor;
            if (candidate >= fan_lo && candidate <= fan_hi) {
              match = "; the value matches " + std::string(basis) + " " + short_number(candidate, 6) + " (" +
                      (factor < 1 ? "1/" + short_number(1 / factor) : short_number(factor)) + " times the declared)";
              break;
            }
          }
          if (match.empty()) {
            match = "; the value matches " + std::string(basis) + " " + short_number(hint->scale / m.variance, 4) +
                    " (interval [" + short_number(fan_lo, 4) + ", " + short_number(fan_hi, 4) + "])";
          }
        }
        f.sentence += match;
      }
    }
    report.add(f);
  }
  return report;
}

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
/// dist::symmetric_uniform, dist::normal or dist::truncated_normal). The view may be a
/// region of its tensor. `subject` names the claim in sentences (default: d's text).
template <class E, class D>
audit_report check_distribution(const strided_view<E>& v, const D& d, const audit_options& options = {},
                                std::string subject = "") {
  detail::check_alpha(options.alpha, "check_distribution");
  const detail::declared declared = detail::declare(d);
  if (subject.empty()) subject = declared.text();
  return detail::conformance(detail::gather(v, options.layout), declared, options.alpha, subject, nullptr);
}

/// Checks that v holds what `scheme` draws for a weight with these fans and layout.
/// Works for every scheme with distribution(fans) (variance scaling, Glorot, He,
/// LeCun, fixed); when the scheme is a variance-scaling rule, a wrong standard
/// deviation is explained by the fan that would give it.
template <class E, class Scheme>
audit_report check_scheme(const strided_view<E>& v, const weight_info& w, const Scheme& scheme,
                          const audit_options& options = {}) {
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
  return detail::conformance(detail::gather(v, w.layout), declared, options.alpha, subject,
                             scaling ? &hint : nullptr);
}

/// The same for the weight of a layer description (dense, convolution, embedding, ...):
/// its shape is checked against the layer and its fans come from the layer. A packed
/// layer (LSTM, GRU) is checked block by block, each with its own fans.
template <class E, class Layer, class Scheme, class = decltype(std::declval<const Layer&>().layer_fans())>
audit_report check_scheme(const strided_view<E>& v, const Layer& layer, const Scheme& scheme,
                          const audit_options& options = {}) {
  static_assert(detail::has_distribution<Scheme>::value, "kindling::check_scheme needs a scheme with distribution(fans); "
                "for orthogonal or delta_orthogonal use check_orthogonal or check_delta_orthogonal (audit/structure.hpp)");
  layer.check_shape(detail::shape_vector(v.global_shape()));
  const weight_layout layout = detail::layout_of(layer);
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
      detail::block_part(v, b, &part);
      // Each block is a weight of its own; its sentences say which block.
      const audit_report one = check_scheme(part, weight_info{b.block_fans, layout}, scheme, each);
      for (audit_finding f : one.findings()) {
        f.sentence = "block " + std::to_string(b.index) + ": " + f.sentence;
        report.add(f);
      }
    }
    return report;
  } else {
    return check_scheme(v, weight_info{layer.layer_fans(), layout}, scheme, options);
  }
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_CONFORMANCE_HPP
