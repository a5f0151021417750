// kindling/propagate/fixup.hpp: the Fixup depth scaling for residual branches
// (Zhang, Dauphin & Ma, ICLR 2019, sec. 3): with L residual branches of m weight
// layers each, initialize the branch layers by a standard scheme (He), then scale the
// first m - 1 layers of every branch by L^(-1/(2m-2)) and set the last layer of each
// branch to zero.
#ifndef KINDLING_PROPAGATE_FIXUP_HPP
#define KINDLING_PROPAGATE_FIXUP_HPP

#include <cmath>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

#include "../view.hpp"

namespace kindling {

/// L^(-1/(2m-2)) for `branches` = L >= 1 and `layers_per_branch` = m >= 2.
inline double fixup_factor(std::uint64_t branches, std::uint64_t layers_per_branch) {
  constexpr const char* where = "kindling::fixup_factor";
  if (branches == 0) {
    throw std::invalid_argument(std::string(where) + ": argument 'branches' = 0, expected >= 1");
  }
  if (layers_per_branch < 2) {
    throw std::invalid_argument(std::string(where) + ": argument 'layers_per_branch' = " +
                                std::to_string(layers_per_branch) +
                                ", expected >= 2 (the exponent -1/(2m-2) is undefined for m = 1)");
  }
  return std::pow(static_cast<double>(branches),
                  -1.0 / (2.0 * static_cast<double>(layers_per_branch) - 2.0));
}

namespace detail {
template <class E, class F>
void for_each_element(const strided_view<E>& v, F&& f) {
  const std::size_t rank = v.rank();
  std::vector<std::uint64_t> idx(rank, 0);
  const auto& ext = v.part().extent();
  for (std::uint64_t n = 0; n < v.size(); ++n) {
    std::int64_t off = 0;
    for (std::size_t d = 0; d < rank; ++d) off += static_cast<std::int64_t>(idx[d]) * v.stride(d);
    f(v.data()[off]);
    for (std::size_t d = rank; d-- > 0;) {
      if (++idx[d] < ext[d]) break;
      idx[d] = 0;
    }
  }
}
}  // namespace detail

/// Applies Fixup to one branch whose weights (already initialized, in order) are
/// `branch`: all but the last scaled by fixup_factor(branches, branch.size()), the
/// last set to zero.  Returns the factor.  Checks everything before writing.
template <class E>
double apply_fixup(const std::vector<strided_view<E>>& branch, std::uint64_t branches) {
  const double f = fixup_factor(branches, branch.size());
  for (std::size_t k = 0; k + 1 < branch.size(); ++k) {
    detail::for_each_element(branch[k], [f](E& x) { x = static_cast<E>(static_cast<double>(x) * f); });
  }
  detail::for_each_element(branch.back(), [](E& x) { x = static_cast<E>(0); });
  return f;
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_FIXUP_HPP
