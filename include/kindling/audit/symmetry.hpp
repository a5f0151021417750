// kindling/audit/symmetry.hpp: is the symmetry between units broken? Units whose
// incoming weights are equal, or nearly parallel, compute the same thing and get the
// same gradient, so training never tells them apart (common practice). The checks:
//   - zero:            every value 0;
//   - constant:        every value the same nonzero number;
//   - zero-variance-units: units whose incoming weights are all equal;
//   - duplicate-units: units (rows of the unit matrix, schemes/detail/unit_matrix.hpp)
//                      equal value for value;
//   - near-duplicate-units: distinct units at cosine similarity >= a threshold.
//
// What a verdict means. Both unit checks are statistical: they fail only when what they
// found is improbable for independent units, at a false-alarm rate of at most
// options.alpha per tensor (expected chance pairs, a union bound over all pairs).
//   * Near-duplicates. Two independent units of n connections with isotropic
//     directions (normal elements) have cos² ~ Beta(1/2, (n-1)/2), so
//     P(cos >= c) = I_{1-c²}((n-1)/2, 1/2) / 2 (Cai, Fan & Jiang, JMLR 2013, the angle
//     density ∝ sin^{n-2}; from memory, checked against scipy.special.betainc in the
//     tests). For n = 3 that is (1 - c)/2: 0.5 % at c = 0.99, millions of chance pairs
//     among 65536 units. So the threshold used is the larger of options.near_cosine
//     (default 0.99) and the cosine c* that m(m-1)/2 independent pairs exceed with
//     expected count alpha; large n keeps 0.99, small n raises it (n = 3, m = 65536:
//     1 - c* ≈ 9e-13 at alpha 1e-3). The check is reported as not applicable when
//     n = 1 (every pair of 1-connection units is parallel or antiparallel) or when
//     1 - c* < 64 u² (u the element type's unit roundoff: rounding each value moves a
//     unit's direction by about u, so the element type cannot resolve c*; e.g.
//     bfloat16 or float16 units of 3 connections at any size that needs c* near 1).
//     Non-normal elements (uniform, truncated) have slightly non-isotropic directions;
//     their false-alarm rate is measured in the tests rather than bounded.
//   * Duplicates. Units are equal by chance when the element type holds few values
//     (bfloat16 units of 3 connections, 1-connection units in any type): with q the
//     probability that two elements are equal (estimated from up to 2^20 values) the
//     expected number of chance-equal pairs is λ = m(m-1)/2 · q^n. The check fails when
//     the observed number of equal pairs D has Poisson tail P(X >= D; λ) < alpha
//     (rare events; Chen–Stein, from memory), and is reported as undecidable, passing,
//     when λ >= 1: then a copied unit cannot be told from chance.
//   * Zero-variance units likewise: m · P(n elements all equal), estimated from the
//     same sample, is their chance count (bfloat16 units of 2 connections are flat with
//     probability q ≈ 0.3 % each).
//
// How, in bounded time and memory. One pass reads each unit in place (or through a
// one-unit buffer, detail/gather.hpp's unit_reader), keeping per unit whether it is flat,
// its norm and a 64-value signed sketch (coordinate t sums ±w_j over j ≡ t mod 64, signs
// from a fixed hash: a sparse random projection that keeps cosines near 1, Achlioptas
// 2003, Weinberger et al. 2009; for n <= 64 the sketch is the unit itself up to signs).
// Exact duplicates have equal sketches: units are grouped by a hash of the sketch and
// compared value by value. Near-duplicates: every pair exactly while units² × n <=
// gram_limit, else random-hyperplane sign bits of the sketches (Charikar, STOC 2002:
// two directions at angle θ get the same sign with probability 1 - θ/π) in bands of b
// bits, b chosen from m and n so that chance pairs per band stay about 16 m; units with
// equal band keys are candidates, checked exactly. Each band's candidate pairs are
// capped (64 m + 4096): a band over the cap is redrawn with twice the bits (up to
// 8192), and past that only neighbours within a bucket are compared (the finding then
// says the search was capped). Enough bands are drawn that a pair at the threshold is
// missed with probability <= 1e-3; the finding states the miss probability.
// Extra memory: about 64 floats and 32 bytes per unit, never a copy of the tensor.
//
// check_independent(a, b) tests whether two tensors (two seeds, two names) are
// correlated: Fisher's z = atanh(r) √(n - 3) against a normal at level alpha.
#ifndef KINDLING_AUDIT_SYMMETRY_HPP
#define KINDLING_AUDIT_SYMMETRY_HPP

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "../fill.hpp"
#include "../random/detail/instruction_set.hpp"
#include "../random/stream.hpp"
#include "conformance.hpp"
#include "detail/gather.hpp"
#include "result.hpp"

namespace kindling {

struct symmetry_options {
  weight_layout layout = weight_layout::out_in;
  double near_cosine = 0.99;  // pairs of units at or above this cosine fail (raised for few connections)
  double alpha = 1e-3;        // false-alarm rate of the unit checks for independent units
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

// ---- chance levels for independent units -------------------------------------------

// ln B(a, 1/2): from B(1/2, 1/2) = π or B(1, 1/2) = 2 by B(a + 1, 1/2) = B(a, 1/2) a / (a + 1/2)
// (both from Γ(x + 1) = x Γ(x)); past a = 10^4 by ln Γ(a + 1/2) - ln Γ(a) = ln(a)/2 - 1/(8a)
// + 1/(192 a³) (Stirling's series, from memory; error below 1e-12 there, checked with
// scipy.special.betaln).
inline double log_beta_half(double a) {
  if (a > 1e4) return 0.5 * std::log(3.14159265358979323846) - (0.5 * std::log(a) - 1 / (8 * a) + 1 / (192 * a * a * a));
  double x = std::fmod(a, 1.0) == 0 ? 1.0 : 0.5;
  double log_b = x == 1.0 ? std::log(2.0) : std::log(3.14159265358979323846);
  for (; x < a; x += 1) log_b += std::log(x / (x + 0.5));
  return log_b;
}

// Regularized incomplete beta I_x(a, b) by its continued fraction (Abramowitz & Stegun
// 26.5.8), evaluated by Lentz's method; the symmetry I_x(a, b) = 1 - I_{1-x}(b, a) keeps
// x on the side where the fraction converges fast.
inline double incomplete_beta(double x, double a, double b, double log_beta) {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  if (x > (a + 1) / (a + b + 2)) return 1 - incomplete_beta(1 - x, b, a, log_beta);
  const double front = std::exp(a * std::log(x) + b * std::log1p(-x) - log_beta) / a;
  const double tiny = 1e-300;
  double f = 1, c = 1, d = 0;
  for (int i = 0; i < 1000; ++i) {
    const double m = i / 2;
    const double term = i == 0       ? 1.0
                        : i % 2 == 0 ? m * (b - m) * x / ((a + 2 * m - 1) * (a + 2 * m))
                                     : -(a + m) * (a + b + m) * x / ((a + 2 * m) * (a + 2 * m + 1));
    d = 1 + term * d;
    d = 1 / (std::fabs(d) < tiny ? tiny : d);
    c = 1 + term / c;
    if (std::fabs(c) < tiny) c = tiny;
    f *= c * d;
    if (std::fabs(c * d - 1) < 1e-15) break;
  }
  return front * (f - 1);
}

/// P(cos >= c) for two independent isotropic units of n connections, c in (0, 1].
inline double chance_cosine_tail(std::uint64_t n, double c) {
  if (n < 2) return 0.5;  // cos = ±1
  if (c >= 1) return 0;
  const double a = 0.5 * static_cast<double>(n - 1);
  return 0.5 * incomplete_beta((1 - c) * (1 + c), a, 0.5, log_beta_half(a));
}

/// The threshold actually used: options' cosine, raised until pairs × P(cos >= c) <= alpha.
inline double chance_threshold(std::uint64_t n, double pairs, double alpha, double near_cosine) {
  if (n < 2) return 2;  // no cosine below 1 separates 1-connection units
  if (pairs * chance_cosine_tail(n, near_cosine) <= alpha) return near_cosine;
  double lo = std::log(1e-300), hi = std::log(1 - near_cosine);  // log(1 - c): lo passes, hi fails
  for (int i = 0; i < 200; ++i) {
    const double mid = 0.5 * (lo + hi);
    (pairs * chance_cosine_tail(n, 1 - std::exp(mid)) <= alpha ? lo : hi) = mid;
  }
  return 1 - std::exp(lo);
}

/// P(X >= d) for X Poisson with mean lambda (summed from d up: no cancellation).
inline double poisson_tail(double lambda, std::uint64_t d) {
  if (d == 0) return 1;
  if (lambda <= 0) return 0;
  double log_term = -lambda;
  for (std::uint64_t k = 1; k <= d; ++k) log_term += std::log(lambda / static_cast<double>(k));
  double term = std::exp(log_term), sum = 0;
  for (std::uint64_t k = d; term > sum * 1e-17 && k < d + 100000; ++k) {
    sum += term;
    term *= lambda / static_cast<double>(k + 1);
  }
  return std::min(1.0, sum);
}

template <class E>
constexpr double unit_roundoff() {
  using e = std::remove_const_t<E>;
  return std::is_same<e, double>::value ? 0x1p-53
         : std::is_same<e, float>::value ? 0x1p-24
         : std::is_same<e, float16>::value ? 0x1p-11
                                           : 0x1p-8;
}

// ---- one pass over the units --------------------------------------------------------

constexpr std::uint64_t sketch_width = 64;

/// What the pass keeps of each unit, and of the whole tensor.
struct unit_summary {
  std::uint64_t rows = 0, cols = 0, width = 0;  // width: sketch values a unit
  std::vector<float> sketch;                    // rows × width
  std::vector<float> sketch_norm;               // rows
  std::vector<std::uint64_t> zero_units, flat_units;
  bool all_equal = true;  // every value equals `first` (-0 and +0 are equal)
  double first = 0;       // the first unit's first value
  bool finite = true;
};

template <class T>
T sign_of_connection(std::uint64_t j) noexcept {
  return (mix64(j ^ 0x736b65746368u) & 1u) ? T(1) : T(-1);
}

// How summarize_unit_rows reads a unit's value j: in place (float, double), from a
// buffer the reader filled (any other layout or type), or straight from the stored
// bfloat16 halves (a bfloat16 is the upper half of a float), so that the loop converts
// as it goes instead of writing and reading a buffer.
template <class T>
struct values_at {
  const T* w;
  T operator()(std::uint64_t j) const noexcept { return w[j]; }
};
struct bfloat16_halves_at {
  const unsigned char* bytes;
  float operator()(std::uint64_t j) const noexcept { return float_of_bfloat16_at(bytes, j); }
};

// The sign of connection j applied as a flip of the sign bit: x * sign exactly (a product
// with +-1 is exact), without a multiplication that a build with FMA enabled (-march=...)
// could fuse with the sum into a multiply-add, which rounds once instead of twice and
// would make the sketch depend on the build.
template <class T>
using value_bits_t = std::conditional_t<sizeof(T) == 4, std::uint32_t, std::uint64_t>;
template <class T>
#if defined(__GNUC__)
__attribute__((always_inline))
#endif
inline T with_sign(T x, value_bits_t<T> flip) noexcept {
  value_bits_t<T> b;
  std::memcpy(&b, &x, sizeof b);
  b ^= flip;
  std::memcpy(&x, &b, sizeof x);
  return x;
}

// One unit r of summarize_units, its values read by at(j): the count of values that
// differ from its first, its sketch and the sketch's norm. Returns false when a value is
// not finite (s.finite is then false). The loops keep independent accumulators and a
// fixed trip count, so that they vectorize without reassociation: each sketch value is
// summed in the same order whichever code runs.
template <class T, class At>
#if defined(__GNUC__)
__attribute__((always_inline))
#endif
inline bool summarize_unit_row(std::uint64_t r, const At& at, const std::vector<value_bits_t<T>>& sign,
                               unit_summary& s) {
  constexpr std::size_t lanes = 16;
  const T first = at(0);
  // A unit is flat when no value differs from its first (a count of the values that
  // differ, rather than a minimum and maximum, so that the loop vectorizes).
  std::uint32_t differ[lanes] = {};
  std::size_t j = 0;
  for (; j + lanes <= s.cols; j += lanes) {
    for (std::size_t l = 0; l < lanes; ++l) differ[l] += at(j + l) != first ? 1u : 0u;
  }
  for (; j < s.cols; ++j) differ[0] += at(j) != first ? 1u : 0u;
  std::uint64_t differing = 0;
  for (std::size_t l = 0; l < lanes; ++l) differing += differ[l];
  T acc[sketch_width] = {};
  std::uint64_t j0 = 0;
  if (s.width == sketch_width) {  // a fixed trip count, so that the loop vectorizes
    for (; j0 + sketch_width <= s.cols; j0 += sketch_width) {
      for (std::size_t t = 0; t < sketch_width; ++t) acc[t] += with_sign(at(j0 + t), sign[j0 + t]);
    }
  }
  for (; j0 < s.cols; j0 += s.width) {
    const std::uint64_t len = std::min(s.width, s.cols - j0);
    for (std::uint64_t t = 0; t < len; ++t) acc[t] += with_sign(at(j0 + t), sign[j0 + t]);
  }
  // A NaN or an infinity in the unit leaves a sketch value that is not finite (so do
  // sums that overflow: then the values themselves are looked at).
  bool sketch_finite = true;
  for (std::uint64_t t = 0; t < s.width; ++t) sketch_finite = sketch_finite && std::isfinite(acc[t]);
  if (!sketch_finite) {
    for (std::uint64_t i = 0; i < s.cols; ++i) s.finite = s.finite && std::isfinite(at(i));
    if (!s.finite) return false;
  }
  float* out = &s.sketch[static_cast<std::size_t>(r * s.width)];
  double norm = 0;
  for (std::uint64_t t = 0; t < s.width; ++t) out[t] = static_cast<float>(acc[t]), norm += double(out[t]) * out[t];
  s.sketch_norm[r] = static_cast<float>(std::sqrt(norm));
  if (r == 0) s.first = static_cast<double>(first);
  s.all_equal = s.all_equal && differing == 0 && static_cast<double>(first) == s.first;
  if (differing == 0 && first == 0) s.zero_units.push_back(r);
  if (s.cols >= 2 && differing == 0) s.flat_units.push_back(r);
  return true;
}

// The units' pass of summarize_units, into s (sized by the caller). Inlined into each
// caller, so the AVX2 caller below vectorizes it with eight-float vectors: the same
// operations lane by lane (additions only), so the same bits whichever runs. (An
// AVX-512 form was tried on a 4096 x 4096 bfloat16 tensor and gained nothing: the pass
// waits on memory, not on arithmetic.)
template <class E>
#if defined(__GNUC__)
__attribute__((always_inline))
#endif
inline void summarize_unit_rows(const unit_reader<E>& reader, unit_summary& s) {
  using T = typename unit_reader<E>::compute;
  constexpr bool halves =
      std::is_same<typename stored_type<typename unit_reader<E>::element>::type, bfloat16>::value;
  const bool in_place = reader.direct() || (halves && reader.contiguous_unit(0) != nullptr);
  std::vector<T> buffer(in_place ? 0 : static_cast<std::size_t>(s.cols));
  std::vector<value_bits_t<T>> sign(static_cast<std::size_t>(s.cols));
  const value_bits_t<T> sign_bit = value_bits_t<T>{1} << (8 * sizeof(T) - 1);
  for (std::uint64_t j = 0; j < s.cols; ++j) sign[j] = sign_of_connection<T>(j) < 0 ? sign_bit : 0;
  for (std::uint64_t r = 0; r < s.rows; ++r) {
    bool ok;
    if constexpr (halves) {
      if (in_place) {
        const auto* bytes = reinterpret_cast<const unsigned char*>(reader.contiguous_unit(r));
        ok = summarize_unit_row<T>(r, bfloat16_halves_at{bytes}, sign, s);
      } else {
        ok = summarize_unit_row<T>(r, values_at<T>{reader.unit(r, buffer.data())}, sign, s);
      }
    } else {
      ok = summarize_unit_row<T>(r, values_at<T>{reader.unit(r, buffer.data())}, sign, s);
    }
    if (!ok) return;
  }
}

#if defined(KINDLING_LANES_X86)
template <class E>
__attribute__((target("avx2"))) void summarize_unit_rows_avx2(const unit_reader<E>& reader, unit_summary& s) {
  summarize_unit_rows(reader, s);
}
#endif

template <class E>
unit_summary summarize_units(const unit_reader<E>& reader) {
  unit_summary s;
  s.rows = reader.rows();
  s.cols = reader.cols();
  s.width = std::min(s.cols, sketch_width);
  s.sketch.assign(static_cast<std::size_t>(s.rows * s.width), 0.0f);
  s.sketch_norm.assign(static_cast<std::size_t>(s.rows), 0.0f);
#if defined(KINDLING_LANES_X86)
  if (instruction_set_available(instruction_set::avx2)) {
    summarize_unit_rows_avx2(reader, s);
    return s;
  }
#endif
  summarize_unit_rows(reader, s);
  return s;
}

/// Two units of a reader, with the buffers to read them through.
template <class E>
struct unit_pair_reader {
  using T = typename unit_reader<E>::compute;
  explicit unit_pair_reader(const unit_reader<E>& r)
      : reader(r), a_buffer(r.direct() ? 0 : r.cols()), b_buffer(r.direct() ? 0 : r.cols()) {}
  bool same(std::uint64_t a, std::uint64_t b) {
    const T* x = reader.unit(a, a_buffer.data());
    const T* y = reader.unit(b, b_buffer.data());
    for (std::uint64_t j = 0; j < reader.cols(); ++j) {
      if (!(x[j] == y[j])) return false;  // == makes -0 and +0 the same weight
    }
    return true;
  }
  double cosine(std::uint64_t a, std::uint64_t b) {
    const T* x = reader.unit(a, a_buffer.data());
    const T* y = reader.unit(b, b_buffer.data());
    double xx = 0, yy = 0, xy = 0;
    for (std::uint64_t j = 0; j < reader.cols(); ++j) {
      xx += double(x[j]) * x[j], yy += double(y[j]) * y[j], xy += double(x[j]) * y[j];
    }
    return xy / (std::sqrt(xx) * std::sqrt(yy));
  }
  const unit_reader<E>& reader;
  std::vector<T> a_buffer, b_buffer;
};

// A hash of unit r's sketch (-0 and +0 hashed alike), for grouping equal units: any
// function of the sketch's values serves, since a collision is settled by comparing the
// units. Two values a word and four independent chains of mix64, joined at the end: one
// chain over the 64 values waited on 64 multiply latencies in a row, which made the
// grouping a twentieth of a bfloat16 audit (bench/RESULTS.md).
inline std::uint64_t sketch_hash(const unit_summary& s, std::uint64_t r) {
  const auto word = [&](std::uint64_t t) -> std::uint64_t {
    if (t >= s.width) return 0x7a65726fu;  // past the end: a fixed filler
    float x = s.sketch[static_cast<std::size_t>(r * s.width + t)];
    if (x == 0) x = 0;
    std::uint32_t bits;
    std::memcpy(&bits, &x, sizeof bits);
    return bits;
  };
  std::uint64_t h[4] = {0x6b696e646c696e67u, 0x736b65746368u, 0x756e697473u, 0x68617368u};
  for (std::uint64_t t = 0; t < s.width; t += 8) {
    for (std::uint64_t l = 0; l < 4; ++l) h[l] = mix64(h[l] ^ (word(t + 2 * l) << 32 | word(t + 2 * l + 1)));
  }
  return mix64(h[0] ^ mix64(h[1] ^ mix64(h[2] ^ mix64(h[3] ^ s.width))));
}

// Units keyed by a hash, as one sorted 64-bit word each: the hash's high bits, and
// the unit in the low bits (a chance collision of the shortened hashes only adds a
// candidate, which is then compared like the others; sorting words, not pairs, halves
// the sort).
class keyed_units {
 public:
  explicit keyed_units(std::uint64_t units) {
    while (unit_bits_ < 64 && (std::uint64_t{1} << unit_bits_) < units) ++unit_bits_;
  }
  void clear() { words_.clear(); }
  void add(std::uint64_t hash, std::uint64_t unit) { words_.push_back((hash & ~unit_mask()) | unit); }
  /// Sorts the words in increasing order: a least-significant-digit radix sort, eight
  /// passes of a byte (linear in the units; the same order as std::sort, which it
  /// replaced: the pass ran several such sorts a band), a pass skipped when every word
  /// has the same byte there.
  void sort() {
    const std::size_t n = words_.size();
    if (n < 2) return;
    spare_.resize(n);
    // The eight passes' counts in one read of the words (a pass moves the words, not
    // the bytes each holds, so the counts of every pass are known before the first).
    counts_.assign(8 * 256, 0);
    for (const std::uint64_t w : words_) {
      for (int pass = 0; pass < 8; ++pass) ++counts_[static_cast<std::size_t>(pass * 256) + ((w >> (8 * pass)) & 0xFFu)];
    }
    for (int pass = 0; pass < 8; ++pass) {
      std::size_t* start = &counts_[static_cast<std::size_t>(pass * 256)];
      const int shift = 8 * pass;
      if (start[(words_[0] >> shift) & 0xFFu] == n) continue;
      std::size_t sum = 0;
      for (int b = 0; b < 256; ++b) sum += start[b], start[b] = sum - start[b];
      for (const std::uint64_t w : words_) spare_[start[(w >> shift) & 0xFFu]++] = w;
      words_.swap(spare_);
    }
  }
  std::size_t size() const noexcept { return words_.size(); }
  std::uint64_t unit(std::size_t i) const noexcept { return words_[i] & unit_mask(); }
  /// Calls each(first, last) for each run of two or more equal keys (after sort()).
  template <class Each>
  void for_each_run(Each each) const {
    for (std::size_t i = 0; i < words_.size();) {
      std::size_t k = i + 1;
      while (k < words_.size() && (words_[k] & ~unit_mask()) == (words_[i] & ~unit_mask())) ++k;
      if (k - i > 1) each(i, k);
      i = k;
    }
  }

 private:
  std::uint64_t unit_mask() const noexcept {
    return unit_bits_ >= 64 ? ~std::uint64_t{0} : (std::uint64_t{1} << unit_bits_) - 1;
  }
  int unit_bits_ = 0;
  std::vector<std::uint64_t> words_, spare_;
  std::vector<std::size_t> counts_;  // sort()'s byte counts, kept between calls
};

template <class E>
std::vector<std::vector<std::uint64_t>> duplicate_groups(const unit_summary& s, unit_pair_reader<E>& units) {
  keyed_units entries(s.rows);
  for (std::uint64_t r = 0; r < s.rows; ++r) entries.add(sketch_hash(s, r), r);
  entries.sort();
  std::vector<std::vector<std::uint64_t>> groups;
  entries.for_each_run([&](std::size_t first, std::size_t last) {
    std::vector<std::uint64_t> rows;
    for (std::size_t i = first; i < last; ++i) rows.push_back(entries.unit(i));
    while (rows.size() > 1) {  // split a collision into groups of really equal units
      std::vector<std::uint64_t> same{rows[0]}, rest;
      for (std::size_t k = 1; k < rows.size(); ++k) (units.same(rows[0], rows[k]) ? same : rest).push_back(rows[k]);
      if (same.size() > 1) groups.push_back(same);
      rows.swap(rest);
    }
  });
  std::sort(groups.begin(), groups.end());
  return groups;
}

/// Chance rates of equal values, from up to 2^20 elements of units spread over the tensor:
/// pair = P(two elements are equal), unit = P(a unit's n elements are all equal), each the
/// unbiased estimate from the sample's counts of each value (falling factorials).
struct equal_rates {
  double pair = 0, unit = 0;
  double pair_unit = 0;  // P(two units are equal) = pair^n
};

template <class E>
equal_rates equal_value_rates(const unit_reader<E>& reader) {
  using T = typename unit_reader<E>::compute;
  using stored = typename stored_type<typename unit_reader<E>::element>::type;
  const std::uint64_t per = std::max<std::uint64_t>(1, (std::uint64_t{1} << 20) / reader.cols());
  const std::uint64_t step = std::max<std::uint64_t>(1, reader.rows() / per);
  std::vector<T> buffer(reader.direct() ? 0 : reader.cols());
  equal_rates out;
  double n = 0;
  // Each distinct value's count c, in increasing order of value_bits (the order of the sums).
  const auto add_value = [&](double c) {
    out.pair += c * (c - 1) / (n * (n - 1));
    double all = 1;
    for (std::uint64_t t = 0; t < reader.cols() && all > 0; ++t) all *= (c - double(t)) / (n - double(t));
    out.unit += all;
  };
  if constexpr (std::is_same<stored, bfloat16>::value || std::is_same<stored, float16>::value) {
    // 16-bit values are counted by bit pattern: no sort. Among finite values the order
    // of the patterns (as unsigned) is that of value_bits (+0, the positive values
    // upwards, the negative ones by magnitude), once -0 (0x8000) is counted as +0, so
    // the sums are the same bits as the sort's below.
    std::vector<std::uint32_t> counts(std::size_t{1} << 16, 0);
    std::uint64_t total = 0;
    bool finite = true;
    for (std::uint64_t r = 0; r < reader.rows() && total < (std::uint64_t{1} << 20); r += step) {
      const T* w = reader.unit(r, buffer.data());
      for (std::uint64_t j = 0; j < reader.cols(); ++j) {
        finite = finite && std::isfinite(w[j]);
        ++counts[element_codec<stored>::round(static_cast<float>(w[j]))];
      }
      total += reader.cols();
    }
    if (finite) {
      counts[0] += counts[0x8000];
      counts[0x8000] = 0;
      n = static_cast<double>(total);
      for (const std::uint32_t c : counts) {
        if (c != 0) add_value(static_cast<double>(c));
      }
      out.pair_unit = std::pow(out.pair, static_cast<double>(reader.cols()));
      return out;
    }
  }
  std::vector<std::uint64_t> bits;
  for (std::uint64_t r = 0; r < reader.rows() && bits.size() < (std::size_t{1} << 20); r += step) {
    const T* w = reader.unit(r, buffer.data());
    for (std::uint64_t j = 0; j < reader.cols(); ++j) bits.push_back(value_bits(static_cast<double>(w[j])));
  }
  std::sort(bits.begin(), bits.end());
  n = static_cast<double>(bits.size());
  for (std::size_t i = 0; i < bits.size();) {
    std::size_t k = i + 1;
    while (k < bits.size() && bits[k] == bits[i]) ++k;
    add_value(static_cast<double>(k - i));
    i = k;
  }
  out.pair_unit = std::pow(out.pair, static_cast<double>(reader.cols()));
  return out;
}

/// A count of suspect findings against its chance mean: fails when P(X >= count) < alpha
/// for X Poisson(lambda); undecided (passes) when lambda >= 1, chance alone explains it.
inline audit_finding against_chance(const char* check, const std::string& found, std::uint64_t count, double lambda,
                                    double alpha) {
  const std::string said = found + "; " + short_number(lambda) + " expected by chance";
  if (lambda >= 1) return {check, true, said + ": with so few distinct values a unit, chance explains it; not decided"};
  const double p = poisson_tail(lambda, count);
  return {check, p >= alpha, said + " (p = " + short_number(p) + ")", static_cast<double>(count), p};
}

/// How the near-duplicate search went.
struct near_search {
  std::vector<unit_pair> pairs;   // sorted by (first, second)
  double threshold = 0;           // the cosine used
  bool applicable = true;
  std::string why_not;            // when not applicable
  double miss = 0;                // probability that a pair at the threshold was missed
  bool capped = false;            // a band was over its cap after the last redraw
};

// The dot products of x (width values) with columns 0..15 of a width × stride
// row-major matrix, into out[0..15]: the sums stay in registers (GCC and Clang vector
// types of four floats; a plain loop elsewhere).
inline void sixteen_dots(const float* matrix, std::uint64_t stride, const float* x, std::uint64_t width, float* out) {
#if defined(__GNUC__)
  typedef float four __attribute__((vector_size(16)));
  // Even and odd i in separate sums, so that two chains of additions run side by side.
  four a = {}, b = {}, c = {}, d = {}, a1 = {}, b1 = {}, c1 = {}, d1 = {}, p;
  std::uint64_t i = 0;
  for (; i + 2 <= width; i += 2) {
    const four xi = {x[i], x[i], x[i], x[i]}, xj = {x[i + 1], x[i + 1], x[i + 1], x[i + 1]};
    const float* row = matrix + i * stride;
    std::memcpy(&p, row, sizeof p), a += p * xi;
    std::memcpy(&p, row + 4, sizeof p), b += p * xi;
    std::memcpy(&p, row + 8, sizeof p), c += p * xi;
    std::memcpy(&p, row + 12, sizeof p), d += p * xi;
    std::memcpy(&p, row + stride, sizeof p), a1 += p * xj;
    std::memcpy(&p, row + stride + 4, sizeof p), b1 += p * xj;
    std::memcpy(&p, row + stride + 8, sizeof p), c1 += p * xj;
    std::memcpy(&p, row + stride + 12, sizeof p), d1 += p * xj;
  }
  for (; i < width; ++i) {
    const four xi = {x[i], x[i], x[i], x[i]};
    const float* row = matrix + i * stride;
    std::memcpy(&p, row, sizeof p), a += p * xi;
    std::memcpy(&p, row + 4, sizeof p), b += p * xi;
    std::memcpy(&p, row + 8, sizeof p), c += p * xi;
    std::memcpy(&p, row + 12, sizeof p), d += p * xi;
  }
  a += a1, b += b1, c += c1, d += d1;
  std::memcpy(out, &a, sizeof a);
  std::memcpy(out + 4, &b, sizeof b);
  std::memcpy(out + 8, &c, sizeof c);
  std::memcpy(out + 12, &d, sizeof d);
#else
  for (int l = 0; l < 16; ++l) out[l] = 0;
  for (std::uint64_t i = 0; i < width; ++i) {
    for (int l = 0; l < 16; ++l) out[l] += matrix[i * stride + l] * x[i];
  }
#endif
}

#if defined(KINDLING_LANES_X86)
// The same on AVX2 (vectors of eight floats), for CPUs that have it: the same sums in
// the same order, lane by lane.
__attribute__((target("avx2"))) inline void sixteen_dots_avx2(const float* matrix, std::uint64_t stride,
                                                                const float* x, std::uint64_t width, float* out) {
  typedef float eight __attribute__((vector_size(32)));
  eight a = {}, b = {}, a1 = {}, b1 = {}, p;
  std::uint64_t i = 0;
  for (; i + 2 <= width; i += 2) {
    const eight xi = {x[i], x[i], x[i], x[i], x[i], x[i], x[i], x[i]};
    const eight xj = {x[i + 1], x[i + 1], x[i + 1], x[i + 1], x[i + 1], x[i + 1], x[i + 1], x[i + 1]};
    const float* row = matrix + i * stride;
    std::memcpy(&p, row, sizeof p), a += p * xi;
    std::memcpy(&p, row + 8, sizeof p), b += p * xi;
    std::memcpy(&p, row + stride, sizeof p), a1 += p * xj;
    std::memcpy(&p, row + stride + 8, sizeof p), b1 += p * xj;
  }
  for (; i < width; ++i) {
    const eight xi = {x[i], x[i], x[i], x[i], x[i], x[i], x[i], x[i]};
    const float* row = matrix + i * stride;
    std::memcpy(&p, row, sizeof p), a += p * xi;
    std::memcpy(&p, row + 8, sizeof p), b += p * xi;
  }
  a += a1, b += b1;
  std::memcpy(out, &a, sizeof a);
  std::memcpy(out + 8, &b, sizeof b);
}
#endif

/// The signs of len <= 64 dot products as one word: bit len - 1 - k is set when
/// dots[k] > 0 (the first dot in the highest bit). Independent ORs rather than a chain of
/// shifts, so that the band keys do not wait on one another.
inline std::uint64_t sign_word(const float* dots, std::uint64_t len) noexcept {
  std::uint64_t word = 0;
  for (std::uint64_t k = 0; k < len; ++k) word |= std::uint64_t{dots[k] > 0 ? 1u : 0u} << (len - 1 - k);
  return word;
}

template <class E>
near_search near_pairs(const unit_summary& s, unit_pair_reader<E>& units, const symmetry_options& o) {
  near_search out;
  const double m = static_cast<double>(s.rows);
  const double pairs = m * (m - 1) / 2;
  out.threshold = chance_threshold(s.cols, pairs, o.alpha, o.near_cosine);
  const double u = unit_roundoff<E>();
  if (s.cols < 2) {
    out.applicable = false;
    out.why_not = "units of 1 connection are all parallel or antiparallel, so no cosine tells a copy from chance";
    return out;
  }
  if (1 - out.threshold < 64 * u * u) {
    out.applicable = false;
    out.why_not = "among " + std::to_string(s.rows) + " independent units of " + std::to_string(s.cols) +
                  " connections only a cosine above " + short_number(out.threshold, 15) +
                  " would be improbable, finer than this element type resolves";
    return out;
  }
  std::vector<char> zero(static_cast<std::size_t>(s.rows), 0);  // zero units are reported by the other checks
  for (std::uint64_t r : s.zero_units) zero[r] = 1;
  auto consider = [&](std::uint64_t a, std::uint64_t b) {
    if (zero[a] || zero[b]) return;
    const double c = units.cosine(a, b);
    if (c >= out.threshold) out.pairs.push_back({std::min(a, b), std::max(a, b), c});
  };
  if (m * m * static_cast<double>(s.cols) <= static_cast<double>(o.gram_limit)) {
    for (std::uint64_t a = 0; a < s.rows; ++a) {
      for (std::uint64_t b = a + 1; b < s.rows; ++b) consider(a, b);
    }
    return out;
  }
  // Sketch cosines are exact up to rounding when the sketch is the unit (n <= 64), and
  // within a few tenths of the true one otherwise; a wide margin keeps every true pair.
  const double margin = s.width == s.cols ? 1e-3 : 0.3;
  auto sketch_cosine = [&](std::uint64_t a, std::uint64_t b) {
    double xy = 0;
    for (std::uint64_t t = 0; t < s.width; ++t) xy += double(s.sketch[a * s.width + t]) * s.sketch[b * s.width + t];
    return xy / (double(s.sketch_norm[a]) * s.sketch_norm[b]);
  };
  const double pi = 3.14159265358979323846;
  const double theta = 2 * std::asin(std::sqrt(std::max(0.0, (1 - out.threshold) / 2)));
  const double agree_bit = 1 - theta / pi;
  const double dims = static_cast<double>(std::min(s.cols, std::uint64_t{4096}));
  std::uint64_t bits0 = static_cast<std::uint64_t>(std::ceil(pi * std::pow(m / 64, 1 / (dims - 1))));
  bits0 = std::min<std::uint64_t>(1024, std::max<std::uint64_t>(16, (bits0 + 15) / 16 * 16));  // whole groups of 16
  const double agree0 = std::pow(agree_bit, static_cast<double>(bits0));
  const int bands = agree0 >= 1 ? 1 : std::min(16, std::max(1, static_cast<int>(std::ceil(std::log(1e-3) / std::log1p(-agree0)))));
  const double cap = 64 * m + 4096;
  const stream projections = make_stream(0, "kindling.audit.near-duplicate-units");
  std::vector<float> plane, dots;
  keyed_units entries(s.rows);
#if defined(KINDLING_LANES_X86)
  const bool wide = instruction_set_available(instruction_set::avx2);
#endif
  out.miss = 1;
  for (int band = 0; band < bands; ++band) {
    for (std::uint64_t bits = bits0;; bits *= 2) {
      plane.assign(static_cast<std::size_t>(bits * s.width), 0.0f);  // width × bits: plane t is column t
      fill(strided_view<float>(plane.data(), shape(s.width, bits)), dist::normal{0, 1},
           projections.indexed(static_cast<std::uint64_t>(band) * 64 + bits));
      dots.resize(static_cast<std::size_t>(bits));
      entries.clear();
      for (std::uint64_t r = 0; r < s.rows; ++r) {
        if (zero[r]) continue;
        const float* x = &s.sketch[static_cast<std::size_t>(r * s.width)];
        for (std::uint64_t t0 = 0; t0 < bits; t0 += 16) {
#if defined(KINDLING_LANES_X86)
          if (wide) {
            sixteen_dots_avx2(plane.data() + t0, bits, x, s.width, &dots[t0]);
            continue;
          }
#endif
          sixteen_dots(plane.data() + t0, bits, x, s.width, &dots[t0]);
        }
        std::uint64_t key = 0x62616e64u;
        for (std::uint64_t t0 = 0; t0 < bits; t0 += 64) {
          key = mix64(key ^ sign_word(&dots[t0], std::min<std::uint64_t>(64, bits - t0)));
        }
        entries.add(key, r);
      }
      entries.sort();
      double candidates = 0;
      entries.for_each_run([&](std::size_t first, std::size_t last) {
        candidates += 0.5 * double(last - first) * double(last - first - 1);
      });
      const bool over = candidates > cap;
      if (over && bits < 8192) continue;
      // Over the cap at the most bits: each unit meets only its next `window` neighbours.
      const std::size_t window = over ? std::max<std::size_t>(1, static_cast<std::size_t>(cap / m)) : entries.size();
      out.capped = out.capped || over;
      entries.for_each_run([&](std::size_t first, std::size_t last) {
        for (std::size_t x = first; x < last; ++x) {
          for (std::size_t y = x + 1; y < last && y <= x + window; ++y) {
            const std::uint64_t a = entries.unit(x), b = entries.unit(y);
            if (s.sketch_norm[a] == 0 || s.sketch_norm[b] == 0 || sketch_cosine(a, b) >= out.threshold - margin) {
              consider(a, b);
            }
          }
        }
      });
      out.miss *= 1 - std::pow(agree_bit, static_cast<double>(bits));
      break;
    }
  }
  std::sort(out.pairs.begin(), out.pairs.end(), [](const unit_pair& x, const unit_pair& y) {
    return std::make_pair(x.first, x.second) < std::make_pair(y.first, y.second);
  });
  out.pairs.erase(std::unique(out.pairs.begin(), out.pairs.end(),
                              [](const unit_pair& x, const unit_pair& y) { return x.first == y.first && x.second == y.second; }),
                  out.pairs.end());
  return out;
}

inline std::string index_list(const std::vector<std::uint64_t>& xs, std::size_t most = 8) {
  std::string text;
  for (std::size_t i = 0; i < xs.size() && i < most; ++i) text += (i ? ", " : "") + std::to_string(xs[i]);
  if (xs.size() > most) text += ", ...";
  return text;
}

inline void check_symmetry_options(const symmetry_options& o, const char* audit) {
  if (!(o.near_cosine > 0 && o.near_cosine <= 1)) {
    throw std::domain_error(std::string("kindling::") + audit + ": argument 'near_cosine' = " +
                            argument_text(o.near_cosine) + ", expected a cosine in (0, 1]");
  }
  if (!(o.alpha > 0 && o.alpha < 1)) {
    throw std::domain_error(std::string("kindling::") + audit + ": argument 'alpha' = " + argument_text(o.alpha) +
                            ", expected a false-alarm rate in (0, 1)");
  }
}

template <class E>
unit_reader<E> whole_units(const strided_view<E>& v, weight_layout layout, const char* audit) {
  if (!v.is_whole()) {
    throw std::invalid_argument(std::string("kindling::") + audit +
                                ": argument 'view' holds only a region of its tensor; expected the "
                                "whole tensor, because the check compares whole units");
  }
  return unit_reader<E>(v, layout);
}

inline audit_finding duplicate_finding(const std::vector<std::vector<std::uint64_t>>& groups, double units,
                                       const equal_rates& rates, double alpha) {
  if (groups.empty()) return {"duplicate-units", true, "no two units are equal"};
  std::uint64_t in_groups = 0, equal_pairs = 0;
  for (const auto& group : groups) in_groups += group.size(), equal_pairs += group.size() * (group.size() - 1) / 2;
  return against_chance("duplicate-units",
                        "units " + index_list(groups[0]) + " are exact duplicates (" + std::to_string(groups.size()) +
                            " group(s), " + std::to_string(in_groups) + " units in all; " +
                            std::to_string(equal_pairs) + " equal pair(s))",
                        equal_pairs, units * (units - 1) / 2 * rates.pair_unit, alpha);
}

inline audit_finding flat_finding(const std::vector<std::uint64_t>& flat, double units, const equal_rates& rates,
                                  double alpha) {
  if (flat.empty()) return {"zero-variance-units", true, "every unit has varied incoming weights"};
  return against_chance("zero-variance-units",
                        std::to_string(flat.size()) + " unit(s) have zero variance, all incoming weights equal: units " +
                            index_list(flat),
                        flat.size(), units * rates.unit, alpha);
}

template <class E>
audit_finding near_finding(const near_search& found, const unit_pair_reader<E>& units, const symmetry_options& o) {
  if (!found.applicable) return {"near-duplicate-units", true, "not applicable: " + found.why_not};
  std::string how = "";
  if (found.threshold > o.near_cosine) {
    how += " (raised from " + short_number(o.near_cosine, 6) + ": independent units of " +
           std::to_string(units.reader.cols()) + " connections reach that by chance)";
  }
  if (found.capped) how += "; the candidate search was capped, so pairs may be missed";
  if (found.pairs.empty()) {
    return {"near-duplicate-units", true,
            "no two units have cosine similarity >= " + short_number(found.threshold, 15) + how};
  }
  const unit_pair& p = found.pairs[0];
  return {"near-duplicate-units", false,
          "units " + std::to_string(p.first) + " and " + std::to_string(p.second) + " have cosine similarity " +
              short_number(p.cosine, 6) + ", at or above " + short_number(found.threshold, 15) + how + " (" +
              std::to_string(found.pairs.size()) + " pair(s) in all)"};
}

}  // namespace detail

/// Groups of units that are equal value for value (each group sorted, groups in order).
template <class E>
std::vector<std::vector<std::uint64_t>> duplicate_units(const strided_view<E>& v,
                                                        weight_layout layout = weight_layout::out_in) {
  const detail::unit_reader<E> reader = detail::whole_units(v, layout, "duplicate_units");
  const detail::unit_summary s = detail::summarize_units(reader);
  detail::unit_pair_reader<E> units(reader);
  return s.finite ? detail::duplicate_groups(s, units) : std::vector<std::vector<std::uint64_t>>{};
}

/// Pairs of distinct units whose cosine similarity is at least the threshold used (options'
/// near_cosine, raised for few connections; empty when the check is not applicable).
template <class E>
std::vector<unit_pair> near_duplicate_units(const strided_view<E>& v, const symmetry_options& options = {}) {
  detail::check_symmetry_options(options, "near_duplicate_units");
  const detail::unit_reader<E> reader = detail::whole_units(v, options.layout, "near_duplicate_units");
  const detail::unit_summary s = detail::summarize_units(reader);
  detail::unit_pair_reader<E> units(reader);
  return s.finite ? detail::near_pairs(s, units, options).pairs : std::vector<unit_pair>{};
}

/// Runs every symmetry check on the whole tensor v.
template <class E>
audit_report check_symmetry(const strided_view<E>& v, const symmetry_options& options = {}) {
  detail::check_symmetry_options(options, "check_symmetry");
  const detail::unit_reader<E> reader = detail::whole_units(v, options.layout, "check_symmetry");
  audit_report report("symmetry of " + std::to_string(reader.rows()) + " units of " + std::to_string(reader.cols()) +
                      " connections");
  const detail::unit_summary s = detail::summarize_units(reader);
  if (!s.finite) {  // rare: the gathered copy only to name the first non-finite value
    report.add({"finite", false,
                detail::non_finite_sentence(detail::gather(v, options.layout)) + "; the symmetry checks were not run"});
    return report;
  }
  report.add({"finite", true, "all values are finite"});
  const bool zero = s.all_equal && s.first == 0;
  report.add({"zero", !zero,
              zero ? "all " + std::to_string(v.size()) +
                         " values are zero: every unit computes the same thing and symmetry is never broken"
                   : "not all values are zero"});
  const bool constant = !zero && s.all_equal;
  report.add({"constant", !constant,
              constant ? "every value is " + detail::short_number(s.first, 6) +
                             ": a constant tensor leaves all units identical"
                       : "the values are not all equal"});
  if (zero || constant) return report;

  detail::unit_pair_reader<E> units(reader);
  const auto groups = detail::duplicate_groups(s, units);
  // The chance rates need a sort of up to 2^20 values: only when something was found.
  const detail::equal_rates rates =
      groups.empty() && s.flat_units.empty() ? detail::equal_rates{} : detail::equal_value_rates(reader);
  const double m = static_cast<double>(reader.rows());
  report.add(detail::duplicate_finding(groups, m, rates, options.alpha));
  report.add(detail::flat_finding(s.flat_units, m, rates, options.alpha));
  detail::near_search found = detail::near_pairs(s, units, options);
  // Exact duplicates are reported above; here only the pairs that are not equal.
  found.pairs.erase(std::remove_if(found.pairs.begin(), found.pairs.end(),
                                   [&](const unit_pair& p) { return units.same(p.first, p.second); }),
                    found.pairs.end());
  report.add(detail::near_finding(found, units, options));
  return report;
}

// Every element type's check_symmetry, in compiled mode instantiated once in the
// compiled library (as detail::conformance, conformance.hpp).
#define KINDLING_SYMMETRY_INSTANCE(PREFIX, E) \
  PREFIX audit_report check_symmetry<E>(const strided_view<E>&, const symmetry_options&);
#if defined(KINDLING_COMPILED)
KINDLING_AUDIT_INSTANCES(KINDLING_SYMMETRY_INSTANCE, extern template)
#endif

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
