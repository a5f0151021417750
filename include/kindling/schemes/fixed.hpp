// kindling/schemes/fixed.hpp: uniform, normal and truncated normal weights with
// explicitly given parameters (no fans involved).
#ifndef KINDLING_SCHEMES_FIXED_HPP
#define KINDLING_SCHEMES_FIXED_HPP

#include <string>

#include "../random/sample.hpp"
#include "scheme.hpp"

namespace kindling {

/// Uniform on [lo, hi).
struct fixed_uniform {
  double lo = 0;
  double hi = 1;

  std::string name() const { return "uniform"; }
  dist::uniform distribution(const fans& = {}) const { return dist::uniform{lo, hi}; }
  void check(const shape&, const weight_info&) const { validate(distribution()); }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info&, const stream& s, Exec&& exec) const {
    fill(v, distribution(), s, domain::values, std::forward<Exec>(exec));
  }
};

/// Normal with the given mean and standard deviation.
struct fixed_normal {
  double mean = 0;
  double stddev = 1;

  std::string name() const { return "normal"; }
  dist::normal distribution(const fans& = {}) const { return dist::normal{mean, stddev}; }
  void check(const shape&, const weight_info&) const { validate(distribution()); }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info&, const stream& s, Exec&& exec) const {
    fill(v, distribution(), s, domain::values, std::forward<Exec>(exec));
  }
};

/// Normal truncated to mean ± cut·σ, where σ is chosen so that the values drawn have
/// standard deviation `stddev` (not σ): σ = stddev / sd(Z | |Z| < cut). With the default
/// cut of 2 that factor is 0.8796256610342398 (standard truncated-normal formula;
/// scipy.stats.truncnorm(-2, 2).std()).
struct fixed_truncated_normal {
  double mean = 0;
  double stddev = 1;
  double cut = 2;

  std::string name() const { return "truncated-normal"; }
  dist::truncated_normal distribution(const fans& = {}) const {
    detail::require_positive_argument(cut, "fixed_truncated_normal", "cut");
    detail::require_positive_argument(stddev, "fixed_truncated_normal", "stddev");
    const double sigma = stddev / truncated_normal_stddev(-cut, cut);
    return dist::truncated_normal{mean, sigma, -cut, cut};
  }
  void check(const shape&, const weight_info&) const { validate(distribution()); }
  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info&, const stream& s, Exec&& exec) const {
    fill(v, distribution(), s, domain::values, std::forward<Exec>(exec));
  }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_FIXED_HPP
