// Tests of schemes/orthogonal.hpp: orthogonal (Haar, Mezzadri 2007) and delta-orthogonal
// (Xiao et al., ICML 2018).
#include "kindling/schemes/orthogonal.hpp"

#include <doctest/doctest.h>

#include "../support/errors.hpp"
#include "../support/gain_refusal.hpp"
#include "../support/layer_fill.hpp"

#include <Eigen/Dense>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <string>
#include <utility>
#include <vector>

namespace {

using kindling_test::as_double;
using kindling_test::filled;
using kindling_test::mentions;
using kindling_test::message_of;
using kindling::shape;
using kindling::strided_view;
using kindling::weight_info;
using kindling::weight_layout;

// The unit matrix (rows = units, by the layout's output axis) of a row-major weight, in double.
template <class E>
Eigen::MatrixXd unit_matrix_of(const std::vector<E>& memory, const shape& global, weight_layout layout) {
  const kindling::detail::unit_matrix um(global, layout);
  Eigen::MatrixXd m(static_cast<Eigen::Index>(um.rows), static_cast<Eigen::Index>(um.cols));
  for (std::uint64_t r = 0; r < um.rows; ++r) {
    for (std::uint64_t c = 0; c < um.cols; ++c) {
      m(static_cast<Eigen::Index>(r), static_cast<Eigen::Index>(c)) =
          as_double(memory[static_cast<std::size_t>(um.flat(r, c))]);
    }
  }
  return m;
}

// max |W^T W - gain^2 I| (tall or square) or max |W W^T - gain^2 I| (wide).
double gram_error(const Eigen::MatrixXd& w, double gain) {
  const Eigen::MatrixXd g = w.rows() >= w.cols() ? Eigen::MatrixXd(w.transpose() * w)
                                                  : Eigen::MatrixXd(w * w.transpose());
  return (g - gain * gain * Eigen::MatrixXd::Identity(g.rows(), g.cols())).cwiseAbs().maxCoeff();
}

// The Gaussian matrix of the documented construction: m x n, m = max(rows, cols),
// A(a, b) = standard normal of element a * n + b of domain `gaussian`, drawn here with
// the plain fill engine into row-major memory.
Eigen::MatrixXd gaussian_matrix(std::uint64_t rows, std::uint64_t cols, const kindling::stream& st) {
  const std::uint64_t m = std::max(rows, cols), n = std::min(rows, cols);
  std::vector<double> g(static_cast<std::size_t>(m * n));
  kindling::fill(strided_view<double>(g.data(), shape{m, n}), kindling::dist::normal{0, 1}, st,
                 kindling::domain::gaussian);
  Eigen::MatrixXd a(static_cast<Eigen::Index>(m), static_cast<Eigen::Index>(n));
  for (std::uint64_t i = 0; i < m; ++i)
    for (std::uint64_t j = 0; j < n; ++j)
      a(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = g[static_cast<std::size_t>(i * n + j)];
  return a;
}

// Orthonormal basis of A's columns by classical Gram-Schmidt, done twice, in long double:
// an independent route to the Q with positive R diagonal, which is the unique factor that
// Mezzadri's sign correction produces.
Eigen::MatrixXd gram_schmidt_q(const Eigen::MatrixXd& a) {
  const Eigen::Index m = a.rows(), n = a.cols();
  std::vector<long double> q(static_cast<std::size_t>(m * n));
  auto at = [&](Eigen::Index i, Eigen::Index j) -> long double& { return q[static_cast<std::size_t>(j * m + i)]; };
  for (Eigen::Index j = 0; j < n; ++j) {
    for (Eigen::Index i = 0; i < m; ++i) at(i, j) = a(i, j);
    for (int pass = 0; pass < 2; ++pass) {
      for (Eigen::Index k = 0; k < j; ++k) {
        long double dot = 0;
        for (Eigen::Index i = 0; i < m; ++i) dot += at(i, k) * at(i, j);
        for (Eigen::Index i = 0; i < m; ++i) at(i, j) -= dot * at(i, k);
      }
    }
    long double norm = 0;
    for (Eigen::Index i = 0; i < m; ++i) norm += at(i, j) * at(i, j);
    norm = std::sqrt(norm);
    for (Eigen::Index i = 0; i < m; ++i) at(i, j) /= norm;
  }
  Eigen::MatrixXd out(m, n);
  for (Eigen::Index j = 0; j < n; ++j)
    for (Eigen::Index i = 0; i < m; ++i) out(i, j) = static_cast<double>(at(i, j));
  return out;
}


}  // namespace

TEST_CASE("orthogonal: the unit matrix is gain times orthonormal columns (tall, square) or rows (wide)") {
  const auto st = kindling::make_stream(11, "pump.encoder.w");
  struct case_ {
    shape global;
    weight_layout layout;
    double gain;
  };
  // Saxe et al. 2014 / Mezzadri 2007: Q^T Q = I for tall Q, Q Q^T = I for wide Q.
  const std::vector<case_> cases = {
      {{32, 32}, weight_layout::out_in, 1.0},           // square
      {{50, 20}, weight_layout::out_in, 1.5},           // tall: 50 units, 20 inputs
      {{20, 50}, weight_layout::out_in, 0.5},           // wide
      {{50, 20}, weight_layout::in_out, 2.0},           // [in, out]: 20 units, 50 inputs (wide)
      {{16, 4, 3, 3}, weight_layout::out_in_spatial, 1.0},   // conv, 16 x 36 (wide)
      {{64, 2, 3, 3}, weight_layout::out_in_spatial, 1.0},   // conv, 64 x 18 (tall)
      {{3, 3, 8, 64}, weight_layout::spatial_in_out, 1.0},   // conv, 64 x 72 (wide)
      {{24, 3, 3, 2}, weight_layout::out_spatial_in, 1.0},   // conv, 24 x 18 (tall)
  };
  // Runs check(c) for every case, with the case in the failure message.
  auto each = [&](auto&& check) {
    for (const case_& c : cases) {
      CAPTURE(c.global.text());
      CAPTURE(kindling::layout_name(c.layout));
      check(c, weight_info{{}, c.layout});
    }
  };
  SUBCASE("float: to 1e-5 * gain^2") {
    each([&](const case_& c, const weight_info& w) {
      const std::vector<float> f = filled<float>(c.global, w, kindling::orthogonal{c.gain}, st);
      CHECK_MESSAGE(gram_error(unit_matrix_of(f, c.global, c.layout), c.gain) < 1e-5 * c.gain * c.gain,
                    "expected orthonormal columns or rows times the gain");
    });
  }
  SUBCASE("double: to 1e-12 * gain^2") {
    each([&](const case_& c, const weight_info& w) {
      const std::vector<double> d = filled<double>(c.global, w, kindling::orthogonal{c.gain}, st);
      CHECK_MESSAGE(gram_error(unit_matrix_of(d, c.global, c.layout), c.gain) < 1e-12 * c.gain * c.gain,
                    "expected orthonormal columns or rows times the gain");
    });
  }
  SUBCASE("float16 and bfloat16: to their precision (2^-11, 2^-8 per entry)") {
    each([&](const case_& c, const weight_info& w) {
      const std::vector<kindling::float16> h = filled<kindling::float16>(c.global, w, kindling::orthogonal{c.gain}, st);
      const std::vector<kindling::bfloat16> b = filled<kindling::bfloat16>(c.global, w, kindling::orthogonal{c.gain}, st);
      // Each entry has a relative rounding error <= 2^-11 (2^-8), so a Gram entry is off by
      // at most about 2 * gain^2 * u; the bound leaves a factor 2 of room.
      CHECK(gram_error(unit_matrix_of(h, c.global, c.layout), c.gain) < 4 * 0x1p-11 * c.gain * c.gain);
      CHECK(gram_error(unit_matrix_of(b, c.global, c.layout), c.gain) < 4 * 0x1p-8 * c.gain * c.gain);
    });
  }
}

TEST_CASE("orthogonal: agrees with an independent long-double Gram-Schmidt to the documented 1e-8 * |gain|") {
  // The documented cross-build tolerance: a different rounding path (here Gram-Schmidt in
  // long double instead of Householder in double) must land within 1e-8 * |gain| of every
  // entry. This also checks the documented Gaussian indices and the sign correction: the
  // Gram-Schmidt Q is the one whose R has a positive diagonal.
  const std::vector<std::pair<std::uint64_t, std::uint64_t>> sizes = {{64, 64}, {100, 30}, {30, 100}, {7, 7}};
  for (const auto& size : sizes) {
    const std::uint64_t rows = size.first, cols = size.second;
    CAPTURE(rows);
    CAPTURE(cols);
    const auto st = kindling::make_stream(5, "surrogate.layer" + std::to_string(rows) + "x" + std::to_string(cols));
    const double gain = -1.25;
    const std::vector<double> got = filled<double>({rows, cols}, {}, kindling::orthogonal{gain}, st);
    const Eigen::MatrixXd q = gram_schmidt_q(gaussian_matrix(rows, cols, st));
    const Eigen::MatrixXd expected = rows >= cols ? Eigen::MatrixXd(gain * q) : Eigen::MatrixXd(gain * q.transpose());
    const Eigen::MatrixXd actual = unit_matrix_of(got, {rows, cols}, weight_layout::out_in);
    const double diff = (actual - expected).cwiseAbs().maxCoeff();
    MESSAGE("max |Householder - Gram-Schmidt| = " << diff);
    CHECK_MESSAGE(diff < 1e-8 * std::abs(gain), "expected the documented cross-build tolerance");
  }
}

namespace {

// Diaconis & Shahshahani (1994): for Haar Q in O(n), n >= 2, E[tr Q] = 0 and E[(tr Q)^2] = 1;
// for n >= 4 also E[(tr Q)^4] = 3, so Var[(tr Q)^2] = 2.
struct trace_moments {
  double mean_trace;
  double mean_square;
};

// The moment test for N draws of 4 x 4 matrices: standard errors 1/sqrt(N) and
// sqrt(2/N); each moment may be off by at most 4.5 standard errors. Under Haar draws
// the two-sided normal tail gives a false-alarm rate of about 2 * 6.8e-6 = 1.4e-5 per
// run over random seeds (the seeds here are fixed, so the outcome is deterministic).
bool looks_haar(const trace_moments& m, std::size_t n_draws) {
  const double n = static_cast<double>(n_draws);
  return std::abs(m.mean_trace) < 4.5 / std::sqrt(n) && std::abs(m.mean_square - 1) < 4.5 * std::sqrt(2 / n);
}

template <class Draw>
trace_moments moments_of(std::size_t n_draws, const Draw& draw) {
  double s1 = 0, s2 = 0;
  for (std::size_t t = 0; t < n_draws; ++t) {
    const double tr = draw(t).trace();
    s1 += tr;
    s2 += tr * tr;
  }
  return {s1 / static_cast<double>(n_draws), s2 / static_cast<double>(n_draws)};
}

}  // namespace

TEST_CASE("orthogonal: 4x4 draws have the Haar trace moments, and an unsigned QR of the same matrices does not") {
  constexpr std::size_t draws = 20000;
  constexpr std::uint64_t n = 4;
  const auto base = kindling::make_stream(2018, "haar-trace");

  const trace_moments haar = moments_of(draws, [&](std::size_t t) {
    const std::vector<double> q = filled<double>({n, n}, {}, kindling::orthogonal{}, base.indexed(t));
    return unit_matrix_of(q, {n, n}, weight_layout::out_in);
  });
  MESSAGE("signed QR: E[tr Q] = " << haar.mean_trace << ", E[(tr Q)^2] = " << haar.mean_square);
  CHECK_MESSAGE(looks_haar(haar, draws), "expected E[tr Q] = 0 and E[(tr Q)^2] = 1 (Diaconis & Shahshahani 1994)");

  // The same Gaussian matrices, factorized by the same Householder QR, without the sign
  // correction: Mezzadri (2007) shows this Q is not Haar, and the test must see it.
  const trace_moments unsigned_qr = moments_of(draws, [&](std::size_t t) {
    const Eigen::MatrixXd a = gaussian_matrix(n, n, base.indexed(t));
    const Eigen::HouseholderQR<Eigen::MatrixXd> qr(a);
    return Eigen::MatrixXd(qr.householderQ() * Eigen::MatrixXd::Identity(4, 4));
  });
  MESSAGE("unsigned QR: E[tr Q] = " << unsigned_qr.mean_trace << ", E[(tr Q)^2] = " << unsigned_qr.mean_square);
  CHECK_MESSAGE(!looks_haar(unsigned_qr, draws), "expected the moment test to reject the unsigned QR");
}

TEST_CASE("orthogonal: the values are a function of the stream, shape and element type only") {
  const auto st = kindling::make_stream(3, "vibration.classifier.dense1");
  const shape global{160, 128};  // 20480 elements: two executor tasks
  const weight_info w{};
  const kindling::orthogonal scheme{1.0};

  SUBCASE("the same stream gives the same bytes; another stream other values") {
    const std::vector<float> a = filled<float>(global, w, scheme, st);
    const std::vector<float> b = filled<float>(global, w, scheme, st);
    CHECK(std::memcmp(a.data(), b.data(), a.size() * sizeof(float)) == 0);
    const std::vector<float> c = filled<float>(global, w, scheme, kindling::make_stream(3, "other"));
    CHECK(std::memcmp(a.data(), c.data(), a.size() * sizeof(float)) != 0);
  }
  SUBCASE("two threads write the same bytes as one") {
    const std::vector<float> a = filled<float>(global, w, scheme, st);
    std::vector<float> b(a.size());
    kindling::initialize(strided_view<float>(b.data(), global), w, scheme, st, kindling::thread_executor(2));
    CHECK(std::memcmp(a.data(), b.data(), a.size() * sizeof(float)) == 0);
  }
  SUBCASE("a region filled alone equals that part of the whole") {
    const std::vector<float> whole = filled<float>(global, w, scheme, st);
    const kindling::region part({40, 16}, {50, 70});
    std::vector<float> shard(50 * 70);
    kindling::initialize(strided_view<float>(shard.data(), global, part), w, scheme, st);
    bool same = true;
    for (std::size_t r = 0; r < 50; ++r)
      for (std::size_t c = 0; c < 70; ++c) same = same && shard[r * 70 + c] == whole[(40 + r) * 128 + 16 + c];
    CHECK_MESSAGE(same, "expected the shard to equal the region of the whole weight");
  }
  SUBCASE("column-major memory holds the same logical values") {
    const std::vector<double> rm = filled<double>(global, w, scheme, st);
    std::vector<double> cm(rm.size());
    kindling::initialize(strided_view<double>(cm.data(), global, kindling::storage_order::column_major), w, scheme, st);
    bool same = true;
    for (std::size_t r = 0; r < 160; ++r)
      for (std::size_t c = 0; c < 128; ++c) same = same && cm[c * 160 + r] == rm[r * 128 + c];
    CHECK(same);
  }
  SUBCASE("float16 and bfloat16 are the float values rounded to nearest-even") {
    const std::vector<float> f = filled<float>(global, w, scheme, st);
    const std::vector<kindling::float16> h = filled<kindling::float16>(global, w, scheme, st);
    const std::vector<kindling::bfloat16> b = filled<kindling::bfloat16>(global, w, scheme, st);
    bool same = true;
    for (std::size_t i = 0; i < f.size(); ++i) {
      same = same && h[i].bits == kindling::round_to_float16(f[i]).bits &&
             b[i].bits == kindling::round_to_bfloat16(f[i]).bits;
    }
    CHECK(same);
  }
  SUBCASE("a convolution layer through initialize() is the orthogonal flattened unit matrix") {
    const kindling::convolution conv(6, 16, {3, 3});
    const shape k{16, 6, 3, 3};
    std::vector<float> memory(16 * 6 * 9);
    kindling::initialize(strided_view<float>(memory.data(), k), conv, scheme, st);
    CHECK(gram_error(unit_matrix_of(memory, k, weight_layout::out_in_spatial), 1.0) < 1e-5);
  }
}

TEST_CASE("delta-orthogonal: every tap but the centre is exactly zero, and the centre is orthogonal") {
  // Xiao et al., ICML 2018, eq. for the delta-orthogonal kernel: W(k) = 0 for k != centre,
  // W(centre) orthogonal.
  struct case_ {
    std::uint64_t in, out;
    std::vector<std::uint64_t> kernel;
    weight_layout layout;
  };
  const std::vector<case_> cases = {
      {8, 8, {3, 3}, weight_layout::out_in_spatial},    // square channel matrix
      {4, 12, {5}, weight_layout::out_in_spatial},      // out > in: orthonormal columns (the paper's case)
      {12, 4, {3, 3}, weight_layout::spatial_in_out},   // out < in: orthonormal rows
      {6, 10, {3, 3, 3}, weight_layout::out_spatial_in},
      {5, 5, {4, 2}, weight_layout::out_in_spatial},    // even sizes: the tap at floor(k/2)
  };
  const double gain = 1.4142135623730951;
  for (const case_& c : cases) {
    const kindling::convolution conv(c.in, c.out, c.kernel, 1, c.layout);
    const std::vector<std::uint64_t> ws = conv.weight_shape();
    const shape global(ws.begin(), ws.end());
    CAPTURE(global.text());
    const auto st = kindling::make_stream(9, "pump.conv");
    std::vector<float> memory(static_cast<std::size_t>(global.element_count()));
    kindling::initialize(strided_view<float>(memory.data(), global), conv, kindling::delta_orthogonal{gain}, st);

    // The centre tap and the element of (o, j, tap) by the layout's own axis order (fan.hpp).
    std::uint64_t taps = 1, centre = 0;
    for (std::uint64_t k : c.kernel) {
      taps *= k;
      centre = centre * k + k / 2;
    }
    auto index = [&](std::uint64_t o, std::uint64_t j, std::uint64_t t) -> std::size_t {
      switch (c.layout) {
        case weight_layout::spatial_in_out: return static_cast<std::size_t>((t * c.in + j) * c.out + o);
        case weight_layout::out_spatial_in: return static_cast<std::size_t>((o * taps + t) * c.in + j);
        default: return static_cast<std::size_t>((o * c.in + j) * taps + t);
      }
    };
    bool zeros = true;
    Eigen::MatrixXd mid(static_cast<Eigen::Index>(c.out), static_cast<Eigen::Index>(c.in));
    for (std::uint64_t o = 0; o < c.out; ++o)
      for (std::uint64_t j = 0; j < c.in; ++j)
        for (std::uint64_t t = 0; t < taps; ++t) {
          const float x = memory[index(o, j, t)];
          if (t == centre) mid(static_cast<Eigen::Index>(o), static_cast<Eigen::Index>(j)) = x;
          else zeros = zeros && x == 0.0f && !std::signbit(x);
        }
    CHECK_MESSAGE(zeros, "expected +0 at every tap but the centre");
    CHECK_MESSAGE(gram_error(mid, gain) < 1e-5 * gain * gain, "expected an orthogonal centre tap times the gain");

    // With one group the centre tap is orthogonal{gain} of a dense [out, in] weight on the same stream.
    const std::vector<float> dense = filled<float>({c.out, c.in}, {}, kindling::orthogonal{gain}, st);
    bool same = true;
    for (std::uint64_t o = 0; o < c.out; ++o)
      for (std::uint64_t j = 0; j < c.in; ++j)
        same = same && dense[static_cast<std::size_t>(o * c.in + j)] ==
                           static_cast<float>(mid(static_cast<Eigen::Index>(o), static_cast<Eigen::Index>(j)));
    CHECK(same);
  }
}

TEST_CASE("delta-orthogonal: with groups, each group's centre block is orthogonal and the groups differ") {
  const kindling::convolution conv(8, 8, {3, 3}, 2);  // two groups of 4 -> 4 channels each
  const shape global{8, 4, 3, 3};
  std::vector<double> memory(8 * 4 * 9);
  kindling::initialize(strided_view<double>(memory.data(), global), conv, kindling::delta_orthogonal{},
                       kindling::make_stream(4, "grouped"));
  Eigen::MatrixXd mid(8, 4);
  for (Eigen::Index o = 0; o < 8; ++o)
    for (Eigen::Index j = 0; j < 4; ++j) mid(o, j) = memory[static_cast<std::size_t>((o * 4 + j) * 9 + 4)];
  CHECK(gram_error(mid.topRows(4), 1.0) < 1e-12);
  CHECK(gram_error(mid.bottomRows(4), 1.0) < 1e-12);
  CHECK((mid.topRows(4) - mid.bottomRows(4)).cwiseAbs().maxCoeff() > 0.01);
}

TEST_CASE("orthogonal and delta-orthogonal: bad input throws before anything is written") {
  const auto st = kindling::make_stream(1, "bad");
  kindling_test::guarded_memory<float> memory(64, 7.0f);

  SUBCASE("a rank-1 tensor for orthogonal") {
    const std::string m = message_of<std::invalid_argument>(
        [&] { kindling::initialize(strided_view<float>(memory.data(), shape{64}), weight_info{}, kindling::orthogonal{}, st); });
    CHECK_MESSAGE(mentions(m, "argument 'shape' = [64]"), m);
    CHECK(mentions(m, "rank >= 2"));
  }
  SUBCASE("a non-finite gain") {
    kindling_test::check_non_finite_gains_refused("orthogonal", [&](double gain) {
      kindling::initialize(strided_view<float>(memory.data(), shape{8, 8}), weight_info{}, kindling::orthogonal{gain}, st);
    });
    kindling_test::check_non_finite_gains_refused("delta_orthogonal", [&](double gain) {
      kindling::initialize(strided_view<float>(memory.data(), shape{4, 4, 2, 2}), kindling::convolution(4, 4, {2, 2}),
                           kindling::delta_orthogonal{gain}, st);
    });
  }
  SUBCASE("a matrix too large for a dense QR") {
    // The size is refused in check(), before any memory is looked at: the view below
    // covers only a small region of a huge global shape.
    const shape huge{std::uint64_t{1} << 15, std::uint64_t{1} << 14};  // 2^29 entries
    const std::string m = message_of<std::length_error>([&] {
      kindling::initialize(strided_view<float>(memory.data(), huge, kindling::region({0, 0}, {8, 8})), weight_info{},
                           kindling::orthogonal{}, st);
    });
    CHECK_MESSAGE(mentions(m, "argument 'shape' = [32768, 16384]"), m);
    CHECK(mentions(m, "2^28"));
  }
  SUBCASE("delta-orthogonal of a dense weight, or with fans that do not match the kernel") {
    const std::string m = message_of<std::invalid_argument>(
        [&] { kindling::initialize(strided_view<float>(memory.data(), shape{8, 8}), kindling::dense(8, 8), kindling::delta_orthogonal{}, st); });
    CHECK_MESSAGE(mentions(m, "argument 'layout' = out_in"), m);
    const std::string f = message_of<std::invalid_argument>([&] {
      kindling::initialize(strided_view<float>(memory.data(), shape{4, 4, 2, 2}),
                           weight_info{kindling::fans{4, 4, 1}, weight_layout::out_in_spatial},
                           kindling::delta_orthogonal{}, st);
    });
    CHECK_MESSAGE(mentions(f, "argument 'fans' = (fan_in 4, fan_out 4, receptive_field 1)"), f);
  }
  CHECK_MESSAGE(memory.untouched(), "expected the memory unchanged after a failed call");
}
