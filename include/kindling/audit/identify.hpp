// kindling/audit/identify.hpp: what is this tensor? identify_scheme ranks every
// variance-scaling scheme of the library (Glorot, He, LeCun and the general rule with
// scale 1 or 2), with each fan choice (fan-in, fan-out, fan-average) and each draw
// (uniform, normal, normal truncated at 2σ), by the Kolmogorov–Smirnov distance of
// the values to that candidate's exact CDF. The score is the KS p-value: near 0 for a
// candidate the values cannot come from, uniform on (0, 1) for the true one. Constant
// and sparse tensors are named as such before the ranking.
#ifndef KINDLING_AUDIT_IDENTIFY_HPP
#define KINDLING_AUDIT_IDENTIFY_HPP

#include <algorithm>
#include <string>
#include <vector>

#include "conformance.hpp"
#include "kolmogorov.hpp"

namespace kindling {

struct scheme_candidate {
  std::string scheme;        // e.g. "He normal"
  std::string fan;           // e.g. "fan-in 512"
  fan_scaled rule;     // the candidate as a rule (scale, basis, draw, cut)
  double ks_statistic = 1;   // D_n to the candidate's CDF
  double score = 0;          // KS p-value
  std::string text() const { return scheme + " with " + fan + " (score " + detail::short_number(score) + ")"; }
};

struct identification {
  std::string structure;                    // "", or "constant 0.5", "sparse, 15 nonzero a unit", "non-finite"
  std::vector<scheme_candidate> ranking;    // best first
  /// The best candidate, or nullptr when the tensor was named by its structure.
  const scheme_candidate* best() const noexcept { return ranking.empty() ? nullptr : &ranking.front(); }
};

namespace detail {

inline std::string candidate_name(const fan_scaled& r) {
  const char* draw = r.draw == draw_shape::uniform ? "uniform" : r.draw == draw_shape::normal ? "normal"
                                                                                                : "truncated normal";
  if (r.scale == 2 && r.basis != fan_basis::average) return std::string("He ") + draw;
  if (r.scale == 1 && r.basis == fan_basis::average) return std::string("Glorot ") + draw;
  if (r.scale == 1 && r.basis == fan_basis::in) return std::string("LeCun ") + draw;
  return "variance scaling " + short_number(r.scale) + " " + draw;
}

inline identification identify(const gathered& g, const fans& f) {
  identification out;
  if (g.non_finite != 0) {
    out.structure = "non-finite: " + non_finite_sentence(g);
    return out;
  }
  const auto [lo, hi] = std::minmax_element(g.values.begin(), g.values.end());
  if (*lo == *hi) {
    out.structure = "constant " + short_number(*lo, 6);
    return out;
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
      out.structure = "sparse, " + std::to_string(k) + " nonzero a unit";
      return out;
    }
  }
  std::vector<double> sorted = g.values;
  std::sort(sorted.begin(), sorted.end());
  for (double scale : {1.0, 2.0}) {
    for (fan_basis b : {fan_basis::in, fan_basis::out, fan_basis::average}) {
      for (draw_shape d : {draw_shape::uniform, draw_shape::normal, draw_shape::truncated_normal}) {
        const fan_scaled rule{scale, b, d, 2};
        const declared dd = visit_distribution(rule.distribution(f), [](const auto& x) { return declare(x); });
        scheme_candidate c;
        c.scheme = candidate_name(rule);
        c.fan = fan_text(b, f);
        c.rule = rule;
        c.ks_statistic = ks_statistic_sorted(sorted, [&dd](double x) { return dd.cdf(x); });
        out.ranking.push_back(c);
      }
    }
  }
  std::stable_sort(out.ranking.begin(), out.ranking.end(),
                   [](const scheme_candidate& a, const scheme_candidate& b) { return a.ks_statistic < b.ks_statistic; });
  for (scheme_candidate& c : out.ranking) c.score = ks_p_value(sorted.size(), c.ks_statistic).p_value;
  return out;
}

}  // namespace detail

/// Ranks the candidate schemes for the values of v, a weight with these fans and layout.
template <class E>
identification identify_scheme(const strided_view<E>& v, const weight_info& w) {
  detail::require_fans(w.fans, "identify_scheme");
  return detail::identify(detail::gather(v, w.layout), w.fans);
}

/// The same for the weight of a layer description (not a packed one: identify its
/// blocks one by one).
template <class E, class Layer, class = decltype(std::declval<const Layer&>().layer_fans())>
identification identify_scheme(const strided_view<E>& v, const Layer& layer) {
  static_assert(!detail::is_packed<Layer>::value, "identify the blocks of a packed weight one by one");
  layer.check_shape(detail::shape_vector(v.global_shape()));
  return identify_scheme(v, weight_info{layer.layer_fans(), detail::layout_of(layer)});
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_IDENTIFY_HPP
