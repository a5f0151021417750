// kindling/propagate/convolution_pass.hpp (Eigen): a convolution's forward and backward
// pass over a slice of samples, by im2col and a matrix product.
//
// Storage.  A sample's feature map is one column, channel-major: entry c P + p is channel
// c at position p (P positions, row-major over the spatial axes; convolution_map.hpp).
// The weight is the [out, in / groups x taps] matrix of the [out, in / groups, kernel...]
// tensor read row-major, so group g's block is rows g (out / groups) onward.
//
// Forward, per sample and group: the [P_out, in / groups x taps] patch matrix (im2col;
// column ci taps + t holds input channel ci at the position tap t reads, 0 on padding),
// times the block's transpose, gives the group's [P_out, out / groups] outputs.
// Backward: the output gradient times the block gives the patch gradients, added back
// to the positions they came from (col2im) in one fixed order.  Every sum runs in the
// same order whatever the executor, so a draw gives the same bits on any of them.
#ifndef KINDLING_PROPAGATE_CONVOLUTION_PASS_HPP
#define KINDLING_PROPAGATE_CONVOLUTION_PASS_HPP

#include <Eigen/Dense>

#include <cstdint>

#include "convolution_map.hpp"

namespace kindling {
namespace detail {

inline Eigen::Index as_index(std::uint64_t n) { return static_cast<Eigen::Index>(n); }

/// h = conv(a) + b: a is [in x P_in, n], w [out, in / groups x taps], b [out];
/// h becomes [out x P_out, n].
inline void convolution_forward(const convolution_map& m, const Eigen::MatrixXd& w, const Eigen::VectorXd& b,
                                const Eigen::MatrixXd& a, Eigen::MatrixXd& h) {
  const Eigen::Index pin = as_index(m.in_positions()), pout = as_index(m.out_positions()), taps = as_index(m.taps());
  const Eigen::Index cig = as_index(m.in_channels() / m.groups()), cog = as_index(m.out_channels() / m.groups());
  h.resize(as_index(m.out_channels()) * pout, a.cols());
  Eigen::MatrixXd patches(pout, cig * taps), out(pout, cog);
  for (Eigen::Index j = 0; j < a.cols(); ++j) {
    for (Eigen::Index g = 0; g < as_index(m.groups()); ++g) {
      for (Eigen::Index ci = 0; ci < cig; ++ci) {
        const double* channel = a.col(j).data() + (g * cig + ci) * pin;
        for (Eigen::Index t = 0; t < taps; ++t) {
          for (Eigen::Index p = 0; p < pout; ++p) {
            const std::int64_t src = m.source(static_cast<std::uint64_t>(p), static_cast<std::uint64_t>(t));
            patches(p, ci * taps + t) = src < 0 ? 0.0 : channel[src];
          }
        }
      }
      out.noalias() = patches * w.middleRows(g * cog, cog).transpose();
      for (Eigen::Index o = 0; o < cog; ++o) {
        h.col(j).segment((g * cog + o) * pout, pout) = out.col(o).array() + b(g * cog + o);
      }
    }
  }
}

/// d = the gradient with respect to the convolution's input a, from delta = the
/// gradient with respect to its output h ([out x P_out, n]); d becomes [in x P_in, n].
inline void convolution_backward(const convolution_map& m, const Eigen::MatrixXd& w, const Eigen::MatrixXd& delta,
                                 Eigen::MatrixXd& d) {
  const Eigen::Index pin = as_index(m.in_positions()), pout = as_index(m.out_positions()), taps = as_index(m.taps());
  const Eigen::Index cig = as_index(m.in_channels() / m.groups()), cog = as_index(m.out_channels() / m.groups());
  d.setZero(as_index(m.in_channels()) * pin, delta.cols());
  Eigen::MatrixXd patch_grad(pout, cig * taps);
  for (Eigen::Index j = 0; j < delta.cols(); ++j) {
    for (Eigen::Index g = 0; g < as_index(m.groups()); ++g) {
      const Eigen::Map<const Eigen::MatrixXd> dg(delta.col(j).data() + g * cog * pout, pout, cog);
      patch_grad.noalias() = dg * w.middleRows(g * cog, cog);
      for (Eigen::Index ci = 0; ci < cig; ++ci) {
        double* channel = d.col(j).data() + (g * cig + ci) * pin;
        for (Eigen::Index t = 0; t < taps; ++t) {
          for (Eigen::Index p = 0; p < pout; ++p) {
            const std::int64_t src = m.source(static_cast<std::uint64_t>(p), static_cast<std::uint64_t>(t));
            if (src >= 0) channel[src] += patch_grad(p, ci * taps + t);
          }
        }
      }
    }
  }
}

}  // namespace detail
}  // namespace kindling

#endif  // KINDLING_PROPAGATE_CONVOLUTION_PASS_HPP
