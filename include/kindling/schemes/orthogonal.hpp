// kindling/schemes/orthogonal.hpp: orthogonal and delta-orthogonal initialization.
//
// orthogonal{gain} fills the unit matrix of a weight (schemes/detail/unit_matrix.hpp:
// rows = output units, cols = incoming connections; a convolution kernel is flattened
// by it) with gain times a Haar-distributed orthogonal matrix: orthonormal columns if
// rows >= cols, orthonormal rows if rows < cols (Saxe, McClelland & Ganguli, ICLR 2014,
// for the use as an initialization).
//
// How the matrix is made (format version 1, exact up to the rounding of the QR):
//   - m = max(rows, cols), n = min(rows, cols). The Gaussian matrix A is m x n with
//     A(a, b) = the double-precision standard normal of element a * n + b of domain
//     `gaussian` (3) of the stream (DEVELOPERS.md, "Transforms"), i.e. the values
//     fill() writes for shape {m, n}. So for a tall or square weight, entry (r, c) of
//     the unit matrix comes from Gaussian element r * cols + c; for a wide weight
//     (rows < cols) the transpose is drawn: entry (r, c) from element c * rows + r.
//   - A = QR by Householder reflections in double (Eigen::HouseholderQR), Q the thin
//     m x n factor. Each column j of Q is multiplied by the sign of R(j, j) (+1 if it is
//     0), which makes the factorization unique (R with a positive diagonal) and Q
//     Haar-distributed; without it Q is not Haar (Mezzadri, "How to generate random
//     matrices from the classical compact groups", Notices of the AMS 54, 2007).
//   - W = gain * Q (tall or square) or gain * Q^T (wide), rounded from double to the
//     compute type (float for float, float16 and bfloat16, which are then rounded to
//     nearest-even from that float), then written through fill_generated, so any view,
//     region, storage order and executor works. A region computes the whole matrix
//     and writes its own part: a shard costs as much as the whole weight. So a region
//     (any view that is not the whole tensor) is refused when the factorized matrix has
//     more than 2^26 entries (8192 x 8192, about a minute of QR on one core): one
//     element of a 16384 x 16384 weight would cost the whole 16384 x 16384
//     factorization. Fill such a weight whole, once, and copy out the shards.
//
// delta_orthogonal{gain} (Xiao, Bahri, Sohl-Dickstein, Schoenholz & Pennington, ICML
// 2018, "Dynamical isometry and a mean field theory of CNNs"): a convolution kernel
// (out_in_spatial, spatial_in_out or out_spatial_in, rank 3 to 5) that is zero at every
// tap except the centre tap, index floor(k/2) in each spatial dimension (the middle for
// odd k, as in the paper; for even k the tap just after the middle, documented rather
// than refused), which holds gain times an orthogonal out x in channel matrix: the
// matrix made as above for rows = out, cols = in. The paper takes out >= in; both are
// accepted here (orthonormal columns if out >= in, orthonormal rows if out < in).
// With g groups (read off the fans, fan_out = out/g * receptive_field, as in
// detail/centre_tap.hpp) the centre tap of group k is its own (out/g) x (in/g) matrix, drawn
// from the stream itself when g = 1 and from s.indexed(k) when g > 1; the centre tap
// with g = 1 therefore equals orthogonal{gain} of a dense [out, in] weight on the
// same stream.
//
// Reproducibility. The Gaussian matrix is bit-exact everywhere (format v1). The QR is
// not: Eigen's blocked Householder code and matrix products sum in an order that
// depends on the SIMD width (-march), on fused multiply-add contraction, on the
// product blocking Eigen picks from the CPU's cache sizes and, when Eigen runs its
// products on OpenMP threads, on its thread count. So the values are deterministic for
// a given build on a given machine (and Eigen thread count), and across builds and machines
// they agree to within 1e-8 * |gain| per entry before rounding to the element type
// (float results then differ by at most one unit in the last place, in the rare entry
// that sits near a rounding boundary). The difference is about 1e-16 times the
// condition number of A; the tolerance holds unless that exceeds about 1e7, which for
// a square n x n Gaussian matrix happens with probability about 2n x 1e-7 (Edelman's
// tail P(cond > n x) ~ 2/x, from memory); tall and wide ones are better conditioned.
// The tests check this tolerance against an independent Gram-Schmidt in long double.
//
// Limits: rank >= 2 (a bias vector has no orthogonal structure), a finite gain (0 and
// negative gains are accepted: -Q is Haar as well), and at most 2^28 entries in the
// matrix that is factorized (16384 x 16384): a dense QR keeps two m x n double
// matrices (4 GiB at the limit) and costs about 2 m n^2 flops.
#ifndef KINDLING_SCHEMES_ORTHOGONAL_HPP
#define KINDLING_SCHEMES_ORTHOGONAL_HPP

#include <Eigen/Dense>

#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>
#include <utility>

#include "../element.hpp"
#include "../fan.hpp"
#include "../fill.hpp"
#include "../random/sample.hpp"
#include "../random/stream.hpp"
#include "../view.hpp"
#include "detail/unit_matrix.hpp"
#include "detail/centre_tap.hpp"
#include "scheme.hpp"

namespace kindling {

namespace detail {

/// Largest matrix (rows * cols) that orthogonal and delta_orthogonal factorize.
inline constexpr std::uint64_t max_orthogonal_entries = std::uint64_t{1} << 28;

inline void require_orthogonal_size(std::uint64_t rows, std::uint64_t cols, const shape& global,
                                    const char* scheme) {
  if (rows != 0 && cols > max_orthogonal_entries / rows) {
    detail::reject_argument<std::length_error>(
        scheme, "shape", global.text(),
        "a matrix of at most 2^28 entries for the dense QR (e.g. 16384 x 16384; this one is " +
            std::to_string(rows) + " x " + std::to_string(cols) + ")");
  }
}

/// Largest factorized matrix (rows * cols) for which a region of the weight is filled.
inline constexpr std::uint64_t max_orthogonal_region_entries = std::uint64_t{1} << 26;

// A region of the weight costs the whole rows x cols factorization: refused above
// max_orthogonal_region_entries, before anything is computed or written.
template <class E>
void require_orthogonal_region(const strided_view<E>& v, std::uint64_t rows, std::uint64_t cols,
                               const char* scheme) {
  if (v.is_whole() || cols <= max_orthogonal_region_entries / rows) return;
  detail::reject_argument<std::length_error>(
      scheme, "region", v.part().text() + " of shape " + v.global_shape().text(),
      "a region of a weight whose matrix has at most 2^26 entries (e.g. 8192 x 8192), or the whole tensor "
      "(this region needs the whole " + std::to_string(rows) + " x " + std::to_string(cols) +
          " factorization, however small it is)");
}

/// A dense double matrix in row-major storage (the order the writers read it in).
using row_major_matrix = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

// Compiled mode with Eigen (KINDLING_COMPILED_ORTHOGONAL, set by the kindling::compiled
// target when it was built with Eigen): the QR below, the costliest code of a file that
// uses this scheme, is compiled once in the library (src/compiled.cpp) and
// only declared in users' files (detail/compiled_mode.hpp).
#if defined(KINDLING_COMPILED_ORTHOGONAL)
#define KINDLING_ORTHOGONAL_INLINE
#else
#define KINDLING_ORTHOGONAL_INLINE inline
#endif

/// gain times a Haar-distributed rows x cols matrix with orthonormal columns (rows >= cols)
/// or rows (rows < cols), from the Gaussian matrix of domain `gaussian` of s (see the top
/// of this header for the exact indices). Sizes were checked by require_orthogonal_size.
/// Row-major, so that writing it out in row-major unit order reads memory in order.
KINDLING_ORTHOGONAL_INLINE row_major_matrix haar_orthogonal(std::uint64_t rows, std::uint64_t cols, double gain,
                                                            const stream& s);

#if !defined(KINDLING_COMPILED_ORTHOGONAL) || defined(KINDLING_COMPILED_LIBRARY)
KINDLING_ORTHOGONAL_INLINE row_major_matrix haar_orthogonal(std::uint64_t rows, std::uint64_t cols, double gain,
                                                            const stream& s) {
  const bool wide = rows < cols;
  const std::uint64_t m = wide ? cols : rows;
  const std::uint64_t n = wide ? rows : cols;
  const auto em = static_cast<Eigen::Index>(m);
  const auto en = static_cast<Eigen::Index>(n);
  Eigen::MatrixXd q;
  {
    Eigen::MatrixXd a(em, en);
    {
      // A(a, b) = Gaussian element a * n + b: the row-major index of shape {m, n}. Drawn
      // into row-major storage, where the fill engine writes whole contiguous runs (the
      // vector path), then copied into the column-major storage the QR works in.
      row_major_matrix drawn(em, en);
      fill(strided_view<double>(drawn.data(), shape{m, n}), dist::normal{0, 1}, s, domain::gaussian);
      a = drawn;
    }
    const Eigen::HouseholderQR<Eigen::Ref<Eigen::MatrixXd>> qr(a);  // in place: a holds R and the reflectors
    q = qr.householderQ() * Eigen::MatrixXd::Identity(em, en);
    for (Eigen::Index j = 0; j < en; ++j) {
      // Mezzadri 2007: Q diag(sign R_jj) is Haar; Q alone is not.
      const double sign = qr.matrixQR()(j, j) < 0 ? -gain : gain;
      q.col(j) *= sign;
    }
  }
  // Q^T in row-major storage has Q's column-major layout: a straight copy.
  if (wide) return q.transpose();
  return q;
}
#endif

}  // namespace detail

/// gain times a Haar-distributed (semi-)orthogonal unit matrix (Mezzadri 2007).
struct orthogonal {
  double gain = 1;

  std::string name() const { return "orthogonal"; }

  void check(const shape& global, const weight_info& w) const {
    detail::require_finite_argument(gain, "orthogonal", "gain");
    if (global.rank() < 2) {
      detail::reject_argument<std::invalid_argument>(
          "orthogonal", "shape", global.text(),
          "a weight of rank >= 2 (units by incoming connections; it has rank " + std::to_string(global.rank()) +
              ", and a rank-1 tensor such as a bias has no orthogonal structure)");
    }
    const detail::unit_matrix um(global, w.layout);
    detail::require_orthogonal_size(um.rows, um.cols, global, "orthogonal");
  }

  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    const detail::unit_matrix um(v.global_shape(), w.layout);
    detail::require_orthogonal_region(v, um.rows, um.cols, "orthogonal");
    const detail::row_major_matrix q = detail::haar_orthogonal(um.rows, um.cols, gain, s);
    const auto entry = [&q](std::uint64_t row, std::uint64_t col) {
      return q(static_cast<Eigen::Index>(row), static_cast<Eigen::Index>(col));
    };
    detail::write_unit_entries(v, um, entry, std::forward<Exec>(exec));
  }
};

/// A convolution kernel that is zero except at its centre tap, which is gain times an
/// orthogonal channel matrix (per group) (Xiao et al., ICML 2018).
struct delta_orthogonal {
  double gain = 1;

  std::string name() const { return "delta-orthogonal"; }

  void check(const shape& global, const weight_info& w) const {
    detail::require_finite_argument(gain, "delta_orthogonal", "gain");
    const detail::centre_tap_geometry g = detail::centre_tap_geometry::of(global, w, "delta_orthogonal");
    detail::require_orthogonal_size(g.out_per_group(), g.in, global, "delta_orthogonal");
  }

  template <class E, class Exec>
  void write(const strided_view<E>& v, const weight_info& w, const stream& s, Exec&& exec) const {
    const detail::centre_tap_geometry g =
        detail::centre_tap_geometry::of(v.global_shape(), w, "delta_orthogonal");
    // The centre tap as one out x in matrix: group k's block in rows k*out/g .. (k+1)*out/g - 1.
    const std::uint64_t per_group = g.out_per_group();
    detail::require_orthogonal_region(v, g.out, g.in, "delta_orthogonal");  // every group is factorized
    detail::row_major_matrix centre(static_cast<Eigen::Index>(g.out), static_cast<Eigen::Index>(g.in));
    for (std::uint64_t k = 0; k < g.groups; ++k) {
      const stream group_stream = g.groups == 1 ? s : s.indexed(k);
      centre.middleRows(static_cast<Eigen::Index>(k * per_group), static_cast<Eigen::Index>(per_group)) =
          detail::haar_orthogonal(per_group, g.in, gain, group_stream);
    }
    const auto entry = [&centre](std::uint64_t o, std::uint64_t j) {
      return centre(static_cast<Eigen::Index>(o), static_cast<Eigen::Index>(j));
    };
    detail::write_centre_tap(v, g, entry, std::forward<Exec>(exec));
  }
};

}  // namespace kindling

#endif  // KINDLING_SCHEMES_ORTHOGONAL_HPP
