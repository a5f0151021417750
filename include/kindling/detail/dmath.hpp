// The library's own transcendental functions, written so that every build gives the
// same bits: log, exp, sincos of 2*pi*u, the normal pdf and CDF (Phi) and its inverse.
//
// Why not <cmath>: the last bit of std::log / std::sin / std::erf differs between libm
// builds and CPUs. Here the only floating-point operations are +, -, *, /, sqrt (IEEE
// correctly rounded), std::fma (correctly rounded by definition, in hardware or not),
// exact bit manipulation and exact integer <-> float conversions. Every product that
// feeds an addition is written as std::fma, and no other product feeds an addition, so
// -ffp-contract (on, off or fast) has nothing left to fuse: the results are identical
// under g++ and clang++, -O0 .. -O3, -march=native, x86-64 and aarch64.
//
// Polynomials are truncated Taylor series (their constants are printed by
// tests/detail/dmath_coefficients.py); the rational functions for erfc and Phi^-1 are
// the published ones cited beside them. Accuracy is stated per function and checked in
// tests/detail/dmath.cpp (against std::) and tests/detail/scipy_reference.py (scipy).
#ifndef KINDLING_DETAIL_DMATH_HPP
#define KINDLING_DETAIL_DMATH_HPP

#include <cfloat>
#include <cstdint>
#include <cstring>
#include <limits>
#include <cmath>

#include "compiled_mode.hpp"

#if defined(__FAST_MATH__)
#error "kindling must not be compiled with -ffast-math (or -Ofast): its values are defined bit for bit by IEEE arithmetic (see DEVELOPERS.md, reproducibility format). Remove -ffast-math / -Ofast for the files that include kindling."
#endif

// x87 extended precision or any wider evaluation would round differently.
static_assert(FLT_EVAL_METHOD == 0,
              "kindling needs FLT_EVAL_METHOD == 0 (float and double evaluated in their own "
              "precision, e.g. SSE2 on x86, not x87)");
static_assert(std::numeric_limits<double>::is_iec559 && std::numeric_limits<float>::is_iec559,
              "kindling needs IEEE 754 binary32 and binary64");

namespace kindling::detail {

// ---- exact bit access ---------------------------------------------------------------

inline std::uint64_t bits_of(double x) noexcept {
  std::uint64_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}
inline std::uint32_t bits_of(float x) noexcept {
  std::uint32_t b;
  std::memcpy(&b, &x, sizeof b);
  return b;
}
inline double double_from_bits(std::uint64_t b) noexcept {
  double x;
  std::memcpy(&x, &b, sizeof x);
  return x;
}
inline float float_from_bits(std::uint32_t b) noexcept {
  float x;
  std::memcpy(&x, &b, sizeof x);
  return x;
}

// 2^e for a normal exponent e, built from bits (exact).
inline double pow2(int e) noexcept {
  return double_from_bits(static_cast<std::uint64_t>(e + 1023) << 52);
}

// Horner's rule with every step an fma: c[0] + x (c[1] + x (c[2] + ...)).
template <class T, std::size_t N>
inline T horner(T x, const T (&c)[N]) noexcept {
  T p = c[N - 1];
  for (std::size_t i = N - 1; i-- > 0;) p = std::fma(p, x, c[i]);
  return p;
}

// Per-type layout and constants of the kernels below (printed by
// tests/detail/dmath_coefficients.py). Float kernels carry shorter series.
template <class T>
struct kernel_constants;

template <>
struct kernel_constants<double> {
  using bits = std::uint64_t;
  static constexpr int fraction_bits = 52, bias = 1023;
  static constexpr bits sqrt2_fraction = 0x6a09e667f3bcdu;  // sqrt(2) = 0x1.6a09e667f3bcd p0
  static double from_bits(bits b) noexcept { return double_from_bits(b); }
  static constexpr double ln2_hi = 0x1.62e42fee00000p-1;  // 32 significant bits
  static constexpr double ln2_lo = 0x1.a39ef35793c76p-33;
  // log: 2/(2j+1), j = 1..9
  static constexpr double log_r[] = {0x1.5555555555555p-1, 0x1.999999999999ap-2,
                                     0x1.2492492492492p-2, 0x1.c71c71c71c71cp-3,
                                     0x1.745d1745d1746p-3, 0x1.3b13b13b13b14p-3,
                                     0x1.1111111111111p-3, 0x1.e1e1e1e1e1e1ep-4,
                                     0x1.af286bca1af28p-4};
  // sin(pi t/2) / t and cos(pi t/2) in powers of t^2: (-1)^k (pi/2)^(2k+1)/(2k+1)!, ...
  static constexpr double sin_c[] = {0x1.921fb54442d18p+0,  -0x1.4abbce625be53p-1,
                                     0x1.466bc6775aae2p-4,  -0x1.32d2cce62bd86p-8,
                                     0x1.50783487ee782p-13, -0x1.e3074fde8871fp-19,
                                     0x1.e8f434d018d63p-25, -0x1.6fadb9f155744p-31,
                                     0x1.aaec32af93359p-38};
  static constexpr double cos_c[] = {0x1.0000000000000p+0,  -0x1.3bd3cc9be45dep+0,
                                     0x1.03c1f081b5ac4p-2,  -0x1.55d3c7e3cbffap-6,
                                     0x1.e1f506891babbp-11, -0x1.a6d1f2a204a8cp-16,
                                     0x1.f9d38a3763cc3p-22, -0x1.b6e24f44b128fp-28,
                                     0x1.20c62c2f2d7f5p-34};
  // AS 241 PPND16 (Wichura 1988), in increasing powers; denominators lead with 1.
  static constexpr double ppnd_a[] = {3.3871328727963666080e0,  1.3314166789178437745e+2,
                                      1.9715909503065514427e+3, 1.3731693765509461125e+4,
                                      4.5921953931549871457e+4, 6.7265770927008700853e+4,
                                      3.3430575583588128105e+4, 2.5090809287301226727e+3};
  static constexpr double ppnd_b[] = {1.0,
                                      4.2313330701600911252e+1, 6.8718700749205790830e+2,
                                      5.3941960214247511077e+3, 2.1213794301586595867e+4,
                                      3.9307895800092710610e+4, 2.8729085735721942674e+4,
                                      5.2264952788528545610e+3};
  static constexpr double ppnd_c[] = {1.42343711074968357734e0,  4.63033784615654529590e0,
                                      5.76949722146069140550e0,  3.64784832476320460504e0,
                                      1.27045825245236838258e0,  2.41780725177450611770e-1,
                                      2.27238449892691845833e-2, 7.74545014278341407640e-4};
  static constexpr double ppnd_d[] = {1.0,
                                      2.05319162663775882187e0,  1.67638483018380384940e0,
                                      6.89767334985100004550e-1, 1.48103976427480074590e-1,
                                      1.51986665636164571966e-2, 5.47593808499534494600e-4,
                                      1.05075007164441684324e-9};
  static constexpr double ppnd_e[] = {6.65790464350110377720e0,  5.46378491116411436990e0,
                                      1.78482653991729133580e0,  2.96560571828504891230e-1,
                                      2.65321895265761230930e-2, 1.24266094738807843860e-3,
                                      2.71155556874348757815e-5, 2.01033439929228813265e-7};
  static constexpr double ppnd_f[] = {1.0,
                                      5.99832206555887937690e-1, 1.36929880922735805310e-1,
                                      1.48753612908506148525e-2, 7.86869131145613259100e-4,
                                      1.84631831751005468180e-5, 1.42151175831644588870e-7,
                                      2.04426310338993978564e-15};
};

template <>
struct kernel_constants<float> {
  using bits = std::uint32_t;
  static constexpr int fraction_bits = 23, bias = 127;
  static constexpr bits sqrt2_fraction = 0x3504f3u;  // sqrt(2) = 0x1.6a09e6 p0 in float
  static float from_bits(bits b) noexcept { return float_from_bits(b); }
  static constexpr float ln2_hi = 0x1.62ep-1f;  // 12 significant bits
  static constexpr float ln2_lo = 0x1.0bfbe8p-15f;
  static constexpr float log_r[] = {0x1.555556p-1f, 0x1.99999ap-2f, 0x1.24924ap-2f,
                                    0x1.c71c72p-3f};
  static constexpr float sin_c[] = {0x1.921fb6p+0f, -0x1.4abbcep-1f, 0x1.466bc6p-4f,
                                    -0x1.32d2ccp-8f, 0x1.507834p-13f};
  static constexpr float cos_c[] = {0x1.000000p+0f,  -0x1.3bd3ccp+0f, 0x1.03c1f0p-2f,
                                    -0x1.55d3c8p-6f, 0x1.e1f506p-11f, -0x1.a6d1f2p-16f};
  // AS 241 PPND7 (Wichura 1988).
  static constexpr float ppnd_a[] = {3.3871327179e+00f, 5.0434271938e+01f, 1.5929113202e+02f,
                                     5.9109374720e+01f};
  static constexpr float ppnd_b[] = {1.0f, 1.7895169469e+01f, 7.8757757664e+01f,
                                     6.7187563600e+01f};
  static constexpr float ppnd_c[] = {1.4234372777e+00f, 2.7568153900e+00f, 1.3067284816e+00f,
                                     1.7023821103e-01f};
  static constexpr float ppnd_d[] = {1.0f, 7.3700164250e-01f, 1.2021132975e-01f};
  static constexpr float ppnd_e[] = {6.6579051150e+00f, 3.0812263860e+00f, 4.2868294337e-01f,
                                     1.7337203997e-02f};
  static constexpr float ppnd_f[] = {1.0f, 2.4197894225e-01f, 1.2258202635e-02f};
};

// ---- log ----------------------------------------------------------------------------
// x = 2^k m with m in [sqrt(2)/2, sqrt(2)) by bit manipulation (exact), f = m - 1
// (exact, Sterbenz), s = f / (2 + f), z = s^2 and
//   log(1 + f) = 2 atanh(s) = 2s + s R(z),  R(z) = sum_{j>=1} 2/(2j+1) z^j,
// rewritten with 2s = f - s f as  log(1 + f) = f - s (f - R(z))  (the form of
// fdlibm's e_log.c, Sun Microsystems 1993). |s| <= 3 - 2 sqrt(2) = 0.1716, so the
// series is cut where its remainder is below half an ulp: 9 terms for double, 4 for
// float. log(x) = k ln2_hi + (k ln2_lo + log(1 + f)) with ln2_hi holding few enough
// bits that k ln2_hi is exact. Accuracy: within 1.5 ulp (double), 1 ulp (float).
// Defined for finite x > 0 (subnormals included); x <= 0, inf and NaN are not handled
// (callers never pass them).

template <class T>
inline T log(T x) noexcept {
  using K = kernel_constants<T>;
  using bits = typename K::bits;
  constexpr int fb = K::fraction_bits;
  bits b = bits_of(x);
  int k = 0;
  if ((b >> fb) == 0) {  // subnormal: scale by 2^(fb + 2) into the normal range (exact)
    b = bits_of(x * static_cast<T>(bits{1} << (fb + 2)));
    k = -(fb + 2);
  }
  k += static_cast<int>(b >> fb) - K::bias;
  const bits fraction = b & ((bits{1} << fb) - 1u);
  bits expo = K::bias;
  if (fraction >= K::sqrt2_fraction) {  // m in [sqrt(2)/2, 1)
    expo = K::bias - 1;
    k += 1;
  }
  const T m = K::from_bits((expo << fb) | fraction);
  const T f = m - T(1);
  const T s = f / (T(2) + f);
  const T z = s * s;
  const T f_minus_r = std::fma(-z, horner(z, K::log_r), f);  // f - R(z)
  const T log1pf = std::fma(-s, f_minus_r, f);
  const T kt = static_cast<T>(k);
  return std::fma(kt, K::ln2_hi, std::fma(kt, K::ln2_lo, log1pf));
}

// ---- sin and cos of 2 pi u ----------------------------------------------------------
// u in [0, 1). 4u is exact (a power-of-two scaling), q = floor(4u + 1/2) is the
// nearest quarter turn and t = 4u - q in [-1/2, 1/2] is exact (both are multiples of
// ulp(u) below 4), i.e. an exact octant reduction: 2 pi u = q pi/2 + t pi/2 with
// |t pi/2| <= pi/4. Then sin(pi t / 2) = t S(t^2) and cos(pi t / 2) = C(t^2), Taylor
// series in t (the powers of pi/2 folded into the constants) cut below half an ulp:
// degrees 17 / 16 for double, 9 / 10 for float. The quadrant q only swaps and negates,
// so u = j/4 gives exactly 0 and +-1. Accuracy: within 2 ulp (double and float).

template <class T>
struct sin_cos {
  T sin;
  T cos;
};

template <class T>
inline sin_cos<T> sincos_2pi(T u) noexcept {
  using K = kernel_constants<T>;
  const T q = std::floor(std::fma(T(4), u, T(0.5)));  // 4u is exact, so is this fma
  const T t = std::fma(T(4), u, -q);
  const T t2 = t * t;
  const T s = t * horner(t2, K::sin_c), c = horner(t2, K::cos_c);
  switch (static_cast<unsigned>(q) & 3u) {
    case 0: return {s, c};
    case 1: return {c, -s};
    case 2: return {-s, -c};
    default: return {-c, s};
  }
}

// ---- exp ----------------------------------------------------------------------------
// exp(x) = 2^k exp(r), k = nearest integer to x / ln2, r = x - k ln2_hi - k ln2_lo
// (k ln2_hi exact), |r| <= ln2/2 + tiny; exp(r) by its Taylor series to degree 13
// (remainder below 2^-58), then the exact scaling by 2^k, split in two factors so that
// a subnormal result is rounded once. Accuracy: within 1 ulp for normal results.
// Used by the normal pdf and Phi, so only the double version exists.

inline double exp(double x) noexcept {
  constexpr double inv_ln2 = 0x1.71547652b82fep+0;
  constexpr double ln2_hi = 0x1.62e42fee00000p-1;
  constexpr double ln2_lo = 0x1.a39ef35793c76p-33;
  constexpr double coef[] = {0x1.0000000000000p+0, 0x1.0000000000000p+0, 0x1.0000000000000p-1,
                             0x1.5555555555555p-3, 0x1.5555555555555p-5, 0x1.1111111111111p-7,
                             0x1.6c16c16c16c17p-10, 0x1.a01a01a01a01ap-13, 0x1.a01a01a01a01ap-16,
                             0x1.71de3a556c734p-19, 0x1.27e4fb7789f5cp-22, 0x1.ae64567f544e4p-26,
                             0x1.1eed8eff8d898p-29, 0x1.6124613a86d09p-33};
  if (x != x) return x;
  if (x < -745.2) return 0.0;
  if (x > 709.79) return std::numeric_limits<double>::infinity();
  const double k = std::floor(std::fma(x, inv_ln2, 0.5));
  const double r = std::fma(-k, ln2_lo, std::fma(-k, ln2_hi, x));
  const double p = horner(r, coef);
  const int ki = static_cast<int>(k);
  if (ki > 1023) return p * pow2(ki - 1) * 2.0;
  if (ki < -1021) return p * pow2(ki + 54) * 0x1p-54;  // one rounding into the subnormals
  return p * pow2(ki);
}

// exp(-x^2 / 2) without the error of rounding x^2: x^2 = h + l exactly (l by fma),
// exp(-(h + l)/2) = exp(-h/2) (1 - l/2 + O(l^2)), |l| <= ulp(h)/2.
inline double gaussian_factor(double x) noexcept {
  const double h = x * x;
  const double l = std::fma(x, x, -h);
  const double e = detail::exp(-0.5 * h);
  return std::fma(-0.5 * l, e, e);
}

// Standard normal density, within 3 ulp.
inline double normal_pdf(double x) noexcept {
  constexpr double inv_sqrt_2pi = 0x1.9884533d43651p-2;
  if (!(std::fabs(x) <= 40.0)) return x != x ? x : 0.0;
  return gaussian_factor(x) * inv_sqrt_2pi;
}

// ---- Phi, through erfc --------------------------------------------------------------
// W. J. Cody, "Rational Chebyshev approximations for the error function", Math. Comp.
// 23 (1969) 631-637, in the form of his CALERF routine (SPECFUN, netlib, 1990):
//   y <= 0.46875:     erf(y)  = y N1(y^2) / D1(y^2)
//   0.46875 < y <= 4: erfc(y) = exp(-y^2) N2(y) / D2(y)
//   y > 4:            erfc(y) = exp(-y^2) / y (1/sqrt(pi) - z N3(z) / D3(z)), z = 1/y^2
// Coefficients from memory of CALERF, verified against scipy.special in
// tests/detail/scipy_reference.py. Here y = |x| / sqrt(2) and exp(-y^2) is
// gaussian_factor(x), so the tails keep their relative accuracy: within 8 ulp
// relative for x < 0 (6 measured), 2^-52 absolute for x >= 0.

// The steps of normal_cdf, written once: inlined into normal_cdf below and into the
// audits' copy built for CPUs with FMA (audit/detail/declared.hpp), which gives the same
// bits, as std::fma is correctly rounded in hardware and in libm alike.
#if defined(__GNUC__)
__attribute__((always_inline))
#endif
inline double normal_cdf_steps(double x) noexcept {
  constexpr double inv_sqrt2 = 0x1.6a09e667f3bcdp-1;
  constexpr double inv_sqrt_pi = 0x1.20dd750429b6dp-1;
  // Numerators and denominators in increasing powers; denominators have leading 1.
  constexpr double n1[] = {3.20937758913846947e03, 3.77485237685302021e02, 1.13864154151050156e02,
                           3.16112374387056560e00, 1.85777706184603153e-1};
  constexpr double d1[] = {2.84423683343917062e03, 1.28261652607737228e03, 2.44024637934444173e02,
                           2.36012909523441209e01, 1.0};
  constexpr double n2[] = {1.23033935479799725e03, 2.05107837782607147e03, 1.71204761263407058e03,
                           8.81952221241769090e02, 2.98635138197400131e02, 6.61191906371416295e01,
                           8.88314979438837594e00, 5.64188496988670089e-1, 2.15311535474403846e-8};
  constexpr double d2[] = {1.23033935480374942e03, 3.43936767414372164e03, 4.36261909014324716e03,
                           3.29079923573345963e03, 1.62138957456669019e03, 5.37181101862009858e02,
                           1.17693950891312499e02, 1.57449261107098347e01, 1.0};
  constexpr double n3[] = {6.58749161529837803e-4, 1.60837851487422766e-2, 1.25781726111229246e-1,
                           3.60344899949804439e-1, 3.05326634961232344e-1, 1.63153871373020978e-2};
  constexpr double d3[] = {2.33520497626869185e-3, 6.05183413124413191e-2, 5.27905102951428412e-1,
                           1.87295284992346725e00, 2.56852019228982242e00, 1.0};
  if (x != x) return x;
  if (!(std::fabs(x) <= 38.5)) return x < 0 ? 0.0 : 1.0;  // Phi(-38.5) < 2^-1074
  const double y = std::fabs(x) * inv_sqrt2;
  if (y <= 0.46875) {
    const double ysq = y * y;
    const double erf_y = y * horner(ysq, n1) / horner(ysq, d1);
    return std::fma(0.5, x < 0 ? -erf_y : erf_y, 0.5);
  }
  double r;  // erfc(y) / exp(-y^2)
  if (y <= 4.0) {
    r = horner(y, n2) / horner(y, d2);
  } else {
    const double z = 1.0 / (y * y);
    r = std::fma(-z, horner(z, n3) / horner(z, d3), inv_sqrt_pi) / y;
  }
  const double half_g = 0.5 * gaussian_factor(x);  // Phi(-|x|) = half_g r
  return x < 0 ? half_g * r : std::fma(-half_g, r, 1.0);
}

// Declared for every file, defined here in the header-only mode and in the compiled
// library otherwise (compiled_mode.hpp): the largest function of this header.
KINDLING_COMPILED_INLINE double normal_cdf(double x) noexcept;
#if defined(KINDLING_COMPILED_DEFINITIONS)
KINDLING_COMPILED_INLINE double normal_cdf(double x) noexcept { return normal_cdf_steps(x); }
#endif

// ---- Phi^-1 -------------------------------------------------------------------------
// M. J. Wichura, "Algorithm AS 241: The percentage points of the normal distribution",
// Applied Statistics 37 (1988) 477-484: PPND16 (relative accuracy about 1e-16; 1e-15
// tested) for double, PPND7 (about 1e-7; 5e-7 tested, with float rounding) for float.
// q = p - 1/2; |q| <= 0.425: q A(r)/B(r) with r = 0.180625 - q^2; otherwise
// r = sqrt(-log(min(p, 1-p))), rational in r - 1.6 (r <= 5) or in r - 5, sign of q.
// Coefficients (kernel_constants) from memory, verified against scipy.stats.norm.ppf
// and by the accuracy tests. p = 0 -> -inf, p = 1 -> +inf, outside [0, 1] -> NaN.

template <class T>
inline T normal_quantile(T p) noexcept {
  using K = kernel_constants<T>;
  if (!(p > T(0) && p < T(1))) {
    if (p == T(0)) return -std::numeric_limits<T>::infinity();
    if (p == T(1)) return std::numeric_limits<T>::infinity();
    return std::numeric_limits<T>::quiet_NaN();
  }
  const T q = p - T(0.5);
  if (std::fabs(q) <= T(0.425)) {
    const T r = std::fma(-q, q, T(0.180625));
    return q * horner(r, K::ppnd_a) / horner(r, K::ppnd_b);
  }
  T r = std::sqrt(-detail::log(q < 0 ? p : T(1) - p));
  T z;
  if (r <= T(5)) {
    r -= T(1.6);
    z = horner(r, K::ppnd_c) / horner(r, K::ppnd_d);
  } else {
    r -= T(5);
    z = horner(r, K::ppnd_e) / horner(r, K::ppnd_f);
  }
  return q < 0 ? -z : z;
}

}  // namespace kindling::detail

#endif  // KINDLING_DETAIL_DMATH_HPP
