// kindling/audit/symmetry.hpp: is the symmetry between units broken? Units whose
// incoming weights are equal, or nearly parallel, compute the same thing and get the
// same gradient, so training never tells them apart (common practice). The checks:
//   - zero:            every value 0;
//   - constant:        every value the same nonzero number;
//   - duplicate-units: units (rows of the unit matrix, schemes/detail/unit_matrix.hpp)
//                      equal bit for bit, found by hashing each unit in one pass and
//                      comparing only units whose hashes collide;
//   - near-duplicate-units: pairs with cosine similarity >= a threshold (default
//                      0.99; independent units of n connections have cosines of about
//                      1/√n), through the Gram matrix while units² × connections <=
//                      2^28, else through a random-projection filter: 128 sign bits a
//                      unit from ±1 projections (Charikar, STOC 2002: two directions at
//                      angle θ agree on a sign with probability 1 - θ/π; ±1 projections
//                      approximate Gaussian ones for many connections, Achlioptas
//                      2003), cut into 8 bands of 16 bits; pairs sharing a band are
//                      verified exactly. A pair at cosine 0.99 is missed with
//                      probability about 0.005, at 0.999 about 3e-6;
//   - zero-variance-units: units whose incoming weights are all equal.
// check_independent(a, b) tests whether two tensors (two seeds, two names) are
// correlated: Fisher's z = atanh(r) √(n - 3) against a normal at level alpha.
#ifndef KINDLING_AUDIT_SYMMETRY_HPP
#define KINDLING_AUDIT_SYMMETRY_HPP

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <string>
#include <unordered_map>
#include <utility>
#include <vector>

#include "conformance.hpp"
#include "detail/gather.hpp"
#include "result.hpp"

namespace kindling {

struct symmetry_options {
  weight_layout layout = weight_layout::out_in;
  double near_cosine = 0.99;  // pairs of units at or above this cosine fail
  std::uint64_t gram_limit = std::uint64_t{1} << 28;  // units² × connections for the exact path
};

/// A pair of units and their cosine similarity.
struct unit_pair {
  std::uint64_t first = 0, second = 0;
  double cosine = 0;
};

namespace detail {

inline std::uint64_t mix64(std::uint64_t x) noexcept {  // splitmix64 finalizer (Steele et al. 2014)
  x ^= x >> 30;
  x *= 0xbf58476d1ce4e5b9u;
  x ^= x >> 27;
  x *= 0x94d049bb133111ebu;
  return x ^ (x >> 31);
}

inline std::uint64_t value_bits(double x) noexcept {
  if (x == 0) x = 0;  // -0 and +0 are the same weight
  std::uint64_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}

inline bool same_unit(const gathered& g, std::uint64_t a, std::uint64_t b) {
  for (std::uint64_t j = 0; j < g.cols; ++j) {
    if (value_bits(g.values[a * g.cols + j]) != value_bits(g.values[b * g.cols + j])) return false;
  }
  return true;
}

inline std::vector<std::vector<std::uint64_t>> duplicate_groups(const gathered& g) {
  std::unordered_map<std::uint64_t, std::vector<std::uint64_t>> by_hash;
  for (std::uint64_t r = 0; r < g.rows; ++r) {
    // Four independent chains over the connections j mod 4, so that the multiplies of
    // one do not wait for the others; the hash only groups candidates, which are then
    // compared value by value, so any mixing that spreads units apart will do.
    const double* unit = g.values.data() + r * g.cols;
    std::uint64_t h[4] = {0x6b696e646c696e67u, 1, 2, 3};
    std::uint64_t j = 0;
    for (; j + 4 <= g.cols; j += 4) {
      for (unsigned c = 0; c < 4; ++c) h[c] = mix64(h[c] ^ value_bits(unit[j + c]));
    }
    for (; j < g.cols; ++j) h[0] = mix64(h[0] ^ value_bits(unit[j]));
    by_hash[mix64(h[0] ^ mix64(h[1] ^ mix64(h[2] ^ mix64(h[3]))))].push_back(r);
  }
  std::vector<std::vector<std::uint64_t>> groups;
  for (auto& entry : by_hash) {
    std::vector<std::uint64_t>& rows = entry.second;
    while (rows.size() > 1) {  // split a collision into groups of really equal units
      std::vector<std::uint64_t> same{rows[0]}, rest;
      for (std::size_t k = 1; k < rows.size(); ++k) (same_unit(g, rows[0], rows[k]) ? same : rest).push_back(rows[k]);
      if (same.size() > 1) groups.push_back(same);
      rows = rest;
    }
  }
  for (auto& group : groups) std::sort(group.begin(), group.end());
  std::sort(groups.begin(), groups.end());
  return groups;
}

inline double unit_dot(const gathered& g, std::uint64_t a, std::uint64_t b) {
  double s = 0;
  for (std::uint64_t j = 0; j < g.cols; ++j) s += g.values[a * g.cols + j] * g.values[b * g.cols + j];
  return s;
}

inline std::vector<unit_pair> near_pairs(const gathered& g, double threshold, std::uint64_t gram_limit) {
  std::vector<double> norm(static_cast<std::size_t>(g.rows));
  for (std::uint64_t r = 0; r < g.rows; ++r) norm[r] = std::sqrt(unit_dot(g, r, r));
  std::vector<unit_pair> pairs;
  auto consider = [&](std::uint64_t a, std::uint64_t b) {
    if (norm[a] == 0 || norm[b] == 0) return;  // zero units are reported by the other checks
    const double c = unit_dot(g, a, b) / (norm[a] * norm[b]);
    if (c >= threshold) pairs.push_back({a, b, c});
  };
  const double work = static_cast<double>(g.rows) * static_cast<double>(g.rows) * static_cast<double>(g.cols);
  if (work <= static_cast<double>(gram_limit)) {
    for (std::uint64_t a = 0; a < g.rows; ++a) {
      for (std::uint64_t b = a + 1; b < g.rows; ++b) consider(a, b);
    }
    return pairs;
  }
  // Random-projection filter: signature bit t of unit r is the sign of Σ_j s(t, j) w_rj
  // with s(t, j) = ±1 from a fixed hash, so the filter is the same on every run.
  constexpr int bits = 128, bands = 8, band_bits = bits / bands;
  std::vector<double> proj(static_cast<std::size_t>(g.rows) * bits, 0.0);
  for (std::uint64_t j = 0; j < g.cols; ++j) {
    std::uint64_t signs[2] = {mix64(2 * j + 0x9e3779b97f4a7c15u), mix64(2 * j + 1 + 0x9e3779b97f4a7c15u)};
    for (std::uint64_t r = 0; r < g.rows; ++r) {
      const double w = g.values[r * g.cols + j];
      if (w == 0) continue;
      double* p = &proj[static_cast<std::size_t>(r) * bits];
      for (int t = 0; t < bits; ++t) p[t] += ((signs[t / 64] >> (t % 64)) & 1u) ? w : -w;
    }
  }
  std::vector<std::uint64_t> seen_pairs;
  for (int band = 0; band < bands; ++band) {
    std::unordered_map<std::uint32_t, std::vector<std::uint64_t>> buckets;
    for (std::uint64_t r = 0; r < g.rows; ++r) {
      if (norm[r] == 0) continue;
      std::uint32_t key = 0;
      for (int t = 0; t < band_bits; ++t) {
        key = (key << 1) | (proj[static_cast<std::size_t>(r) * bits + static_cast<std::size_t>(band * band_bits + t)] > 0 ? 1u : 0u);
      }
      buckets[key].push_back(r);
    }
    for (const auto& bucket : buckets) {
      const std::vector<std::uint64_t>& rows = bucket.second;
      for (std::size_t x = 0; x < rows.size(); ++x) {
        for (std::size_t y = x + 1; y < rows.size(); ++y) seen_pairs.push_back(rows[x] * g.rows + rows[y]);
      }
    }
  }
  std::sort(seen_pairs.begin(), seen_pairs.end());
  seen_pairs.erase(std::unique(seen_pairs.begin(), seen_pairs.end()), seen_pairs.end());
  for (std::uint64_t key : seen_pairs) consider(key / g.rows, key % g.rows);
  return pairs;
}

inline std::string index_list(const std::vector<std::uint64_t>& xs, std::size_t most = 8) {
  std::string text;
  for (std::size_t i = 0; i < xs.size() && i < most; ++i) text += (i ? ", " : "") + std::to_string(xs[i]);
  if (xs.size() > most) text += ", ...";
  return text;
}

inline void check_threshold(double c) {
  if (!(c > 0 && c <= 1)) {
    throw std::domain_error("kindling::check_symmetry: argument 'near_cosine' = " + argument_text(c) +
                            ", expected a cosine in (0, 1]");
  }
}

}  // namespace detail

/// Groups of units that are equal bit for bit (each group sorted, groups in order).
template <class E>
std::vector<std::vector<std::uint64_t>> duplicate_units(const strided_view<E>& v,
                                                        weight_layout layout = weight_layout::out_in) {
  const detail::gathered g = detail::gather(v, layout);
  detail::require_whole(g, "duplicate_units");
  return detail::duplicate_groups(g);
}

/// Pairs of distinct units whose cosine similarity is at least options.near_cosine.
template <class E>
std::vector<unit_pair> near_duplicate_units(const strided_view<E>& v, const symmetry_options& options = {}) {
  detail::check_threshold(options.near_cosine);
  const detail::gathered g = detail::gather(v, options.layout);
  detail::require_whole(g, "near_duplicate_units");
  return detail::near_pairs(g, options.near_cosine, options.gram_limit);
}

/// Runs every symmetry check on the whole tensor v.
template <class E>
audit_report check_symmetry(const strided_view<E>& v, const symmetry_options& options = {}) {
  detail::check_threshold(options.near_cosine);
  const detail::gathered g = detail::gather(v, options.layout);
  detail::require_whole(g, "check_symmetry");
  audit_report report("symmetry of " + std::to_string(g.rows) + " units of " + std::to_string(g.cols) +
                      " connections");
  if (g.non_finite != 0) {
    report.add({"finite", false, detail::non_finite_sentence(g) + "; the symmetry checks were not run"});
    return report;
  }
  report.add({"finite", true, "all values are finite"});
  const auto [lo, hi] = std::minmax_element(g.values.begin(), g.values.end());
  const bool zero = *lo == 0 && *hi == 0;
  report.add({"zero", !zero,
              zero ? "all " + std::to_string(g.values.size()) +
                         " values are zero: every unit computes the same thing and symmetry is never broken"
                   : "not all values are zero"});
  const bool constant = !zero && *lo == *hi;
  report.add({"constant", !constant,
              constant ? "every value is " + detail::short_number(*lo, 6) +
                             ": a constant tensor leaves all units identical"
                       : "the values are not all equal"});
  if (zero || constant) return report;

  const auto groups = detail::duplicate_groups(g);
  std::uint64_t in_groups = 0;
  for (const auto& group : groups) in_groups += group.size();
  report.add({"duplicate-units", groups.empty(),
              groups.empty() ? "no two units are equal"
                             : "units " + detail::index_list(groups[0]) + " are exact duplicates (" +
                                   std::to_string(groups.size()) + " group(s), " + std::to_string(in_groups) +
                                   " units in all)"});

  std::vector<std::uint64_t> flat_units;
  if (g.cols >= 2) {
    for (std::uint64_t r = 0; r < g.rows; ++r) {
      bool all_same = true;
      for (std::uint64_t j = 1; j < g.cols && all_same; ++j) all_same = g.values[r * g.cols + j] == g.values[r * g.cols];
      if (all_same) flat_units.push_back(r);
    }
  }
  report.add({"zero-variance-units", flat_units.empty(),
              flat_units.empty() ? "every unit has varied incoming weights"
                                 : std::to_string(flat_units.size()) + " unit(s) have zero variance, all " +
                                       "incoming weights equal: units " + detail::index_list(flat_units)});

  std::vector<unit_pair> pairs = detail::near_pairs(g, options.near_cosine, options.gram_limit);
  // Exact duplicates are reported above; here only the pairs that are not equal.
  pairs.erase(std::remove_if(pairs.begin(), pairs.end(),
                             [&](const unit_pair& p) { return detail::same_unit(g, p.first, p.second); }),
              pairs.end());
  report.add({"near-duplicate-units", pairs.empty(),
              pairs.empty() ? "no two units have cosine similarity >= " + detail::short_number(options.near_cosine, 6)
                            : "units " + std::to_string(pairs[0].first) + " and " + std::to_string(pairs[0].second) +
                                  " have cosine similarity " + detail::short_number(pairs[0].cosine, 6) +
                                  ", at or above " + detail::short_number(options.near_cosine, 6) + " (" +
                                  std::to_string(pairs.size()) + " pair(s) in all)"});
  return report;
}

/// Are two tensors (two seeds, two parameter names) uncorrelated? Both views must have
/// the same number of elements; values are paired in each view's row-major order.
template <class E, class F>
audit_report check_independent(const strided_view<E>& a, const strided_view<F>& b, const audit_options& options = {}) {
  detail::check_alpha(options.alpha, "check_independent");
  if (a.size() != b.size()) {
    throw std::invalid_argument("kindling::check_independent: argument 'b' has " + std::to_string(b.size()) +
                                " elements; expected as many as 'a' (" + std::to_string(a.size()) + ")");
  }
  const detail::gathered x = detail::gather(a, options.layout), y = detail::gather(b, options.layout);
  audit_report report("independence of two tensors of " + std::to_string(a.size()) + " values");
  if (x.non_finite != 0 || y.non_finite != 0) {
    report.add({"finite", false, detail::non_finite_sentence(x.non_finite != 0 ? x : y) + " in tensor " +
                                     (x.non_finite != 0 ? "'a'" : "'b'") + "; the correlation was not computed"});
    return report;
  }
  const double n = static_cast<double>(x.values.size());
  const detail::sample_moments mx = detail::moments_of(x.values), my = detail::moments_of(y.values);
  long double sxy = 0;
  for (std::size_t i = 0; i < x.values.size(); ++i) sxy += (x.values[i] - mx.mean) * (y.values[i] - my.mean);
  const double denominator = std::sqrt(mx.variance * my.variance) * (n - 1);
  if (!(denominator > 0) || n < 4) {
    report.add({"correlation", false, "the correlation is undefined: a tensor is constant or has fewer than 4 values"});
    return report;
  }
  const double r = std::max(-1.0, std::min(1.0, static_cast<double>(sxy) / denominator));
  const double z = std::fabs(r) >= 1 ? 1e300 : std::atanh(r) * std::sqrt(n - 3);  // Fisher 1915
  const double p = detail::two_sided_p(z);
  report.add({"correlation", p >= options.alpha,
              p >= options.alpha
                  ? "correlation " + detail::short_number(r) + " over " + std::to_string(x.values.size()) + " pairs"
                  : "the two tensors are correlated: r = " + detail::short_number(r) + " over " +
                        std::to_string(x.values.size()) + " pairs (p = " + detail::short_number(p) + " < " +
                        detail::short_number(options.alpha) +
                        "); different seeds or names should give independent values",
              z, p});
  return report;
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_SYMMETRY_HPP
