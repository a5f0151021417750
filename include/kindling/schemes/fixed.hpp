// kindling/schemes/fixed.hpp: uniform, normal and truncated normal weights with
// explicitly given parameters (no fans involved).
#ifndef KINDLING_SCHEMES_FIXED_HPP
#define KINDLING_SCHEMES_FIXED_HPP

#include <string>

#include "../random/sample.hpp"
#include "scheme.hpp"

namespace kindling {

namespace detail {
// Shared body: each fixed scheme says which distribution it draws, with no fans.
template <class Self>
struct fixed_scheme {
  void check(const shape&, const weight_info&) const { validate(self().distribution()); }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info&, const stream& s, Exec&& exec) const {
    fill(v, self().distribution(), s, domain::values, std::forward<Exec>(exec));
  }
  const Self& self() const { return static_cast<const Self&>(*this); }
};
}  // namespace detail

/// Uniform on [lo, hi).
struct fixed_uniform : detail::fixed_scheme<fixed_uniform> {
  double lo = 0;
  double hi = 1;
  fixed_uniform() = default;
  fixed_uniform(double lo_, double hi_) : lo(lo_), hi(hi_) {}

  std::string name() const { return "uniform"; }
  dist::uniform distribution(const fans& = {}) const { return dist::uniform{lo, hi}; }
};

/// Normal with the given mean and standard deviation.
struct fixed_normal : detail::fixed_scheme<fixed_normal> {
  double mean = 0;
  double stddev = 1;
  fixed_normal() = default;
  fixed_normal(double mean_, double stddev_) : mean(mean_), stddev(stddev_) {}

  std::string name() const { return "normal"; }
  dist::normal distribution(const fans& = {}) const { return dist::normal{mean, stddev}; }
};

/// Normal truncated to mean ± cut·σ, where σ is chosen so that the values drawn have
/// standard deviation `stddev` (not σ): σ = stddev / sd(Z | |Z| < cut). With the default
/// cut of 2 that factor is 0.8796256610342398 (standard truncated-normal formula;
/// scipy.stats.truncnorm(-2, 2).std()).
struct fixed_truncated_normal : detail::fixed_scheme<fixed_truncated_normal> {
  double mean = 0;
  double stddev = 1;
  double cut = 2;
  fixed_truncated_normal() = default;
  fixed_truncated_normal(double mean_, double stddev_, double cut_ = 2) : mean(mean_), stddev(stddev_), cut(cut_) {}

  std::string name() const { return "truncated-normal"; }
  dist::truncated_normal distribution(const fans& = {}) const {
    detail::require_positive_argument(cut, "fixed_truncated_normal", "cut");
    detail::require_positive_argument(stddev, "fixed_truncated_normal", "stddev");
    const double sigma = stddev / truncated_normal_stddev(-cut, cut);
    return dist::truncated_normal{mean, sigma, -cut, cut};
  }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_FIXED_HPP
