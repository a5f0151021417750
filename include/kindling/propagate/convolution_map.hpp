// kindling/propagate/convolution_map.hpp: where a convolution reads.  Given the spatial
// extent of its input, a convolution's stride, zero padding and dilation fix, for every
// output position and kernel tap, the input position it reads -- or that it reads a
// padded zero.  The prediction (mean_field.hpp) sums second moments over that table and
// the measured pass (convolution_pass.hpp) gathers values with it (im2col), so both see
// exactly the same geometry.
//
// Output extent per spatial axis (the usual arithmetic of a strided, dilated, zero-padded
// convolution; common practice):
//     out = (in + 2 padding - dilation (kernel - 1) - 1) / stride + 1   (integer division)
// which needs dilation (kernel - 1) + 1 <= in + 2 padding.  Padding is symmetric, the same
// number of zeros on both sides; "same" padding for stride 1 and an odd kernel is
// dilation (kernel - 1) / 2 (same_padding).  Positions are row-major flat indices.
#ifndef KINDLING_PROPAGATE_CONVOLUTION_MAP_HPP
#define KINDLING_PROPAGATE_CONVOLUTION_MAP_HPP

#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

#include "../fan.hpp"

namespace kindling {

/// Stride, zero padding (each side) and dilation of a convolution, one value a spatial
/// axis; an empty list means 1, 0 and 1 on every axis.
struct convolution_geometry {
  std::vector<std::uint64_t> stride;
  std::vector<std::uint64_t> padding;
  std::vector<std::uint64_t> dilation;
};

/// Padding that keeps the extent at stride 1: dilation (k - 1) / 2 per axis, for odd
/// kernels (an even kernel cannot be padded symmetrically to keep its extent).
inline std::vector<std::uint64_t> same_padding(const std::vector<std::uint64_t>& kernel,
                                               const std::vector<std::uint64_t>& dilation = {}) {
  constexpr const char* where = "kindling::same_padding";
  std::vector<std::uint64_t> p;
  for (std::size_t d = 0; d < kernel.size(); ++d) {
    if (kernel[d] % 2 == 0) {
      throw std::invalid_argument(std::string(where) + ": argument 'kernel' = " + detail::shape_text(kernel) +
                                  " has the even size " + std::to_string(kernel[d]) + " on axis " +
                                  std::to_string(d) + ", expected odd sizes (symmetric padding)");
    }
    const std::uint64_t dil = dilation.empty() ? 1 : dilation.at(d);
    p.push_back(dil * (kernel[d] - 1) / 2);
  }
  return p;
}

/// A convolution placed on an input of a given spatial extent: the output extent and,
/// per (output position, tap), the input position read (-1 for a padded zero).
class convolution_map {
 public:
  convolution_map(const convolution& conv, std::vector<std::uint64_t> in_extent,
                  const convolution_geometry& geometry)
      : in_channels_(conv.in_channels()), out_channels_(conv.out_channels()), groups_(conv.groups()),
        kernel_(conv.kernel()), in_extent_(std::move(in_extent)) {
    constexpr const char* where = "kindling::convolution_map";
    const std::size_t rank = kernel_.size();
    if (in_extent_.size() != rank) {
      throw std::invalid_argument(std::string(where) + ": argument 'in_extent' = " + detail::shape_text(in_extent_) +
                                  " has " + std::to_string(in_extent_.size()) + " axes, expected " +
                                  std::to_string(rank) + " (one per kernel axis, kernel " +
                                  detail::shape_text(kernel_) + ")");
    }
    stride_ = per_axis(geometry.stride, 1, "geometry.stride", where);
    padding_ = per_axis(geometry.padding, 0, "geometry.padding", where);
    dilation_ = per_axis(geometry.dilation, 1, "geometry.dilation", where);
    for (std::size_t d = 0; d < rank; ++d) {
      detail::require_positive(in_extent_[d], where, "in_extent");
      if (stride_[d] == 0 || dilation_[d] == 0) {
        detail::reject_argument<std::invalid_argument>(
            where, std::string("geometry.") + (stride_[d] == 0 ? "stride" : "dilation") + "[" + std::to_string(d) + "]",
            "0", "at least 1");
      }
      constexpr std::uint64_t limit = std::uint64_t{1} << 32;  // keeps every sum below exact
      if (in_extent_[d] > limit || padding_[d] > limit || dilation_[d] > limit || kernel_[d] > limit) {
        detail::reject_argument<std::length_error>(
            where, "in_extent[" + std::to_string(d) + "]",
            std::to_string(in_extent_[d]) + " (padding " + std::to_string(padding_[d]) + ", dilation " +
                std::to_string(dilation_[d]) + ", kernel " + std::to_string(kernel_[d]) + ")",
            "an extent, padding, dilation and kernel of at most 2^32 on each axis");
      }
      const std::uint64_t span = dilation_[d] * (kernel_[d] - 1) + 1;
      const std::uint64_t padded = in_extent_[d] + 2 * padding_[d];
      if (span > padded) {
        detail::reject_argument<std::invalid_argument>(
            where, "conv.kernel",
            detail::shape_text(kernel_) + ", spanning " + std::to_string(span) + " positions on axis " +
                std::to_string(d) + " (dilation " + std::to_string(dilation_[d]) + ")",
            "a kernel that fits the padded input, " + std::to_string(padded) + " (extent " +
                std::to_string(in_extent_[d]) + " + 2 x padding " + std::to_string(padding_[d]) + ")");
      }
      out_extent_.push_back((padded - span) / stride_[d] + 1);
    }
    in_positions_ = detail::checked_product(in_extent_, where, "input positions");
    out_positions_ = detail::checked_product(out_extent_, where, "output positions");
    taps_ = detail::checked_product(kernel_, where, "kernel taps");
    // the table holds 8 bytes a (position, tap): a bound keeps a hostile extent from
    // asking for terabytes
    constexpr std::uint64_t max_pairs = std::uint64_t{1} << 26;
    if (detail::checked_product(out_positions_, taps_, where, "output positions x kernel taps") > max_pairs) {
      detail::reject_argument<std::length_error>(
          where, "in_extent", detail::shape_text(in_extent_) + ", giving " + std::to_string(out_positions_) +
                                  " output positions x " + std::to_string(taps_) + " kernel taps",
          "at most 2^26 (position, tap) pairs");
    }
    build_sources();
  }

  std::uint64_t in_channels() const noexcept { return in_channels_; }
  std::uint64_t out_channels() const noexcept { return out_channels_; }
  std::uint64_t groups() const noexcept { return groups_; }
  const std::vector<std::uint64_t>& kernel() const noexcept { return kernel_; }
  const std::vector<std::uint64_t>& in_extent() const noexcept { return in_extent_; }
  const std::vector<std::uint64_t>& out_extent() const noexcept { return out_extent_; }
  const std::vector<std::uint64_t>& stride() const noexcept { return stride_; }
  const std::vector<std::uint64_t>& padding() const noexcept { return padding_; }
  const std::vector<std::uint64_t>& dilation() const noexcept { return dilation_; }
  std::uint64_t in_positions() const noexcept { return in_positions_; }
  std::uint64_t out_positions() const noexcept { return out_positions_; }
  std::uint64_t taps() const noexcept { return taps_; }
  /// The input position output position p reads at tap t (row-major kernel index), or
  /// -1 where the tap falls on padding.
  std::int64_t source(std::uint64_t p, std::uint64_t t) const { return sources_[p * taps_ + t]; }

 private:
  std::vector<std::uint64_t> per_axis(const std::vector<std::uint64_t>& v, std::uint64_t fallback,
                                      const char* name, const char* where) const {
    if (v.empty()) return std::vector<std::uint64_t>(kernel_.size(), fallback);
    if (v.size() != kernel_.size()) {
      throw std::invalid_argument(std::string(where) + ": argument '" + name + "' = " + detail::shape_text(v) +
                                  " has " + std::to_string(v.size()) + " values, expected " +
                                  std::to_string(kernel_.size()) + " (one per kernel axis) or none");
    }
    return v;
  }

  void build_sources() {
    const std::size_t rank = kernel_.size();
    sources_.assign(out_positions_ * taps_, -1);
    std::vector<std::uint64_t> o(rank, 0);
    for (std::uint64_t p = 0; p < out_positions_; ++p) {
      std::vector<std::uint64_t> k(rank, 0);
      for (std::uint64_t t = 0; t < taps_; ++t) {
        std::int64_t flat = 0;
        bool inside = true;
        for (std::size_t d = 0; d < rank; ++d) {
          const auto at = static_cast<std::int64_t>(o[d] * stride_[d] + k[d] * dilation_[d]) -
                          static_cast<std::int64_t>(padding_[d]);
          inside = inside && at >= 0 && at < static_cast<std::int64_t>(in_extent_[d]);
          flat = flat * static_cast<std::int64_t>(in_extent_[d]) + at;
        }
        if (inside) sources_[p * taps_ + t] = flat;
        for (std::size_t d = rank; d-- > 0;) {  // next tap, row-major
          if (++k[d] < kernel_[d]) break;
          k[d] = 0;
        }
      }
      for (std::size_t d = rank; d-- > 0;) {  // next output position, row-major
        if (++o[d] < out_extent_[d]) break;
        o[d] = 0;
      }
    }
  }

  std::uint64_t in_channels_, out_channels_, groups_;
  std::vector<std::uint64_t> kernel_, in_extent_, out_extent_, stride_, padding_, dilation_;
  std::uint64_t in_positions_ = 0, out_positions_ = 0, taps_ = 0;
  std::vector<std::int64_t> sources_;
};

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_CONVOLUTION_MAP_HPP
