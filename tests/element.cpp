// Tests of element.hpp: float <-> float16 / bfloat16 rounding and element_traits.
//
// References: the IEEE 754-2008 binary16 format (bit patterns below follow from its
// definition: 1 sign, 5 exponent bits with bias 15, 10 fraction bits; 65504 is the
// largest finite value and 2^-24 the smallest subnormal), Eigen 3.4's Eigen::half and
// Eigen::bfloat16 conversions (Debian libeigen3-dev; both round to nearest even), and an
// independent nearest-value search written here.
#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <type_traits>
#include <vector>

#include <Eigen/Core>

#include "kindling/element.hpp"

namespace {

using kindling::bfloat16;
using kindling::element_bounds;
using kindling::element_traits;
using kindling::float16;

float float_of(std::uint32_t b) {
  float f;
  std::memcpy(&f, &b, sizeof f);
  return f;
}
std::uint32_t bits_of(float f) {
  std::uint32_t b;
  std::memcpy(&b, &f, sizeof b);
  return b;
}
std::uint16_t eigen_half_bits(float f) { return Eigen::numext::bit_cast<std::uint16_t>(Eigen::half(f)); }
std::uint16_t eigen_bf16_bits(float f) {
  return Eigen::numext::bit_cast<std::uint16_t>(Eigen::bfloat16(f));
}

bool is_nan_half(std::uint16_t h) { return (h & 0x7c00u) == 0x7c00u && (h & 0x03ffu) != 0; }

}  // namespace

TEST_CASE("element_traits describe the four element types") {
  static_assert(std::is_same<kindling::compute_type_t<float>, float>::value, "f32 computes in float");
  static_assert(std::is_same<kindling::compute_type_t<double>, double>::value, "f64 in double");
  static_assert(std::is_same<kindling::compute_type_t<float16>, float>::value, "f16 in float");
  static_assert(std::is_same<kindling::compute_type_t<bfloat16>, float>::value, "bf16 in float");
  static_assert(element_traits<double>::words == 2 && element_traits<float>::words == 1 &&
                    element_traits<float16>::words == 1 && element_traits<bfloat16>::words == 1,
                "double takes two counter words, the others one");
  CHECK(std::string(element_traits<float>::name) == "f32");
  CHECK(std::string(element_traits<double>::name) == "f64");
  CHECK(std::string(element_traits<float16>::name) == "f16");
  CHECK(std::string(element_traits<bfloat16>::name) == "bf16");
  CHECK(element_traits<float16>::to_double(float16{0x3555}) == 0x1.554p-2);  // 0.333251953125
  CHECK(element_traits<bfloat16>::to_double(bfloat16{0x3f80}) == 1.0);
}

TEST_CASE("float16 rounding gives the binary16 bit patterns, ties to even") {
  SUBCASE("values from the format definition") {
    CHECK(kindling::round_to_float16(1.0f).bits == 0x3c00);
    CHECK(kindling::round_to_float16(-2.0f).bits == 0xc000);
    CHECK(kindling::round_to_float16(0.5f).bits == 0x3800);
    CHECK(kindling::round_to_float16(65504.0f).bits == 0x7bff);       // largest finite
    CHECK(kindling::round_to_float16(0x1p-14f).bits == 0x0400);       // smallest normal
    CHECK(kindling::round_to_float16(0x1p-24f).bits == 0x0001);       // smallest subnormal
    CHECK(kindling::round_to_float16(1023 * 0x1p-24f).bits == 0x03ff); // largest subnormal
    CHECK(kindling::round_to_float16(1.0f / 3.0f).bits == 0x3555);
    CHECK(kindling::round_to_float16(-0.0f).bits == 0x8000);
    CHECK(kindling::round_to_float16(std::numeric_limits<float>::infinity()).bits == 0x7c00);
    CHECK(kindling::round_to_float16(-std::numeric_limits<float>::infinity()).bits == 0xfc00);
  }
  SUBCASE("halfway cases go to the even neighbour") {
    CHECK(kindling::round_to_float16(1.0f + 0x1p-11f).bits == 0x3c00);      // 1 | 1+2^-10
    CHECK(kindling::round_to_float16(1.0f + 3 * 0x1p-11f).bits == 0x3c02);  // 1+2^-10 | 1+2^-9
    CHECK(kindling::round_to_float16(65520.0f).bits == 0x7c00);  // 65504 | 65536 (= inf)
    CHECK(kindling::round_to_float16(65519.0f).bits == 0x7bff);
    CHECK(kindling::round_to_float16(0x1p-25f).bits == 0x0000);      // 0 | 2^-24
    CHECK(kindling::round_to_float16(3 * 0x1p-25f).bits == 0x0002);  // 2^-24 | 2^-23
    CHECK(kindling::round_to_float16(0x1.000002p-25f).bits == 0x0001);  // just above half
    CHECK(kindling::round_to_float16(1023.5f * 0x1p-24f).bits == 0x0400);  // carry into normal
  }
  SUBCASE("NaN stays NaN") {
    CHECK(is_nan_half(kindling::round_to_float16(std::numeric_limits<float>::quiet_NaN()).bits));
    CHECK(is_nan_half(kindling::round_to_float16(float_of(0x7f800001u)).bits));  // signalling
    CHECK(std::isnan(kindling::to_float(float16{0x7e00})));
    CHECK(std::isnan(kindling::to_float(bfloat16{0x7fc0})));
    CHECK(std::isnan(kindling::to_float(kindling::round_to_bfloat16(float_of(0x7f800001u)))));
  }
  SUBCASE("every binary16 value converts to float exactly and back to itself") {
    for (std::uint32_t h = 0; h < 0x10000u; ++h) {
      const auto b = static_cast<std::uint16_t>(h);
      if (is_nan_half(b)) continue;
      const float f = kindling::to_float(float16{b});
      REQUIRE(f == static_cast<float>(Eigen::numext::bit_cast<Eigen::half>(b)));  // Eigen agrees
      REQUIRE(kindling::round_to_float16(f).bits == b);
    }
  }
}

TEST_CASE("float16 and bfloat16 rounding agree with Eigen and with a nearest-value search") {
  // Eigen 3.4: Eigen::half(float) and Eigen::bfloat16(float), round to nearest even.
  // Inputs: every 1021st float pattern (all exponents and signs), and every midpoint
  // between adjacent binary16 / bfloat16 values (the tie cases) and its two neighbours.
  std::vector<float> inputs;
  for (std::uint64_t b = 0; b < 0x100000000u; b += 1021) inputs.push_back(float_of(static_cast<std::uint32_t>(b)));
  for (std::uint32_t h = 0; h < 0x7bffu; ++h) {
    const float lo = kindling::to_float(float16{static_cast<std::uint16_t>(h)});
    const float hi = kindling::to_float(float16{static_cast<std::uint16_t>(h + 1)});
    const float mid = lo + (hi - lo) / 2;  // exact: 11-bit values, one more bit
    for (float m : {mid, std::nextafter(mid, 0.0f), std::nextafter(mid, 1e9f)}) {
      inputs.push_back(m);
      inputs.push_back(-m);
    }
  }
  for (std::uint32_t h = 0; h < 0x7f7fu; ++h) {
    const float mid = float_of((h << 16) | 0x8000u);  // halfway between bf16 h and h+1
    for (float m : {mid, std::nextafter(mid, 0.0f), std::nextafter(mid, 1e30f)}) {
      inputs.push_back(m);
      inputs.push_back(-m);
    }
  }
  std::size_t checked = 0;
  for (float f : inputs) {
    if (std::isnan(f)) continue;
    REQUIRE(kindling::round_to_float16(f).bits == eigen_half_bits(f));
    REQUIRE(kindling::round_to_bfloat16(f).bits == eigen_bf16_bits(f));
    ++checked;
  }
  MESSAGE("compared " << checked << " conversions with Eigen");

  SUBCASE("nearest-value search (independent of both implementations)") {
    // Sorted non-negative finite binary16 values; ties broken toward the even pattern.
    std::vector<double> values;
    for (std::uint32_t h = 0; h <= 0x7bffu; ++h)
      values.push_back(static_cast<double>(kindling::to_float(float16{static_cast<std::uint16_t>(h)})));
    for (std::size_t k = 0; k < inputs.size(); k += 7) {
      const double a = std::fabs(static_cast<double>(inputs[k]));
      if (std::isnan(a) || a >= 65520.0) continue;
      const auto it = std::lower_bound(values.begin(), values.end(), a);
      std::size_t idx = static_cast<std::size_t>(it - values.begin());
      if (idx == values.size() || (idx > 0 && (a - values[idx - 1] < values[idx] - a ||
                                              (a - values[idx - 1] == values[idx] - a && (idx - 1) % 2 == 0))))
        --idx;
      REQUIRE((kindling::round_to_float16(std::fabs(inputs[k])).bits & 0x7fffu) == idx);
    }
  }
}

TEST_CASE("from_compute keeps rounded values inside the bounds") {
  SUBCASE("a bound that float16 and bfloat16 cannot represent") {
    // 0.10002 lies between float16 0x2e66 (0.0999755859375) and 0x2e67
    // (0.10003662109375), above their midpoint, so values just below it round outside.
    const double bound = 0.10002;
    const element_bounds open{-bound, bound, true, true};
    CHECK(kindling::round_to_float16(0.10001f).bits == 0x2e67);  // rounding alone leaves the interval
    CHECK(element_traits<float16>::from_compute(0.10001f, open).bits == 0x2e66);
    CHECK(element_traits<float16>::from_compute(-0.10001f, open).bits == 0xae66);
    // Sweep floats across (-bound, bound): results stay strictly inside, and are the
    // nearest-even value whenever that is inside.
    std::size_t stepped = 0;
    const float fb = std::nextafter(static_cast<float>(bound), 0.0f);
    for (float x = -fb; x < fb; x = std::nextafter(x, 1.0f) + 1e-7f) {
      const double h = element_traits<float16>::to_double(element_traits<float16>::from_compute(x, open));
      const double b = element_traits<bfloat16>::to_double(element_traits<bfloat16>::from_compute(x, open));
      REQUIRE(std::fabs(h) < bound);
      REQUIRE(std::fabs(b) < bound);
      const double hr = static_cast<double>(kindling::to_float(kindling::round_to_float16(x)));
      if (std::fabs(hr) < bound) REQUIRE(h == hr);
      else ++stepped;
    }
    CHECK_MESSAGE(stepped > 0, "expected the sweep to reach values that rounding alone pushes out");
  }
  SUBCASE("an open bound that rounding lands on, and a closed one") {
    const element_bounds unit{0.0, 1.0, false, true};
    CHECK(element_traits<float16>::from_compute(0.99999f, unit).bits == 0x3bff);
    CHECK(element_traits<bfloat16>::from_compute(0.99999f, unit).bits == 0x3f7f);
    CHECK(element_traits<float>::from_compute(1.0f, unit) == std::nextafter(1.0f, 0.0f));
    CHECK(element_traits<double>::from_compute(1.0, unit) == std::nextafter(1.0, 0.0));
    CHECK(element_traits<float16>::from_compute(0.0f, unit).bits == 0x0000);  // closed: kept
    const element_bounds closed{-2.0, 2.0, false, false};
    CHECK(element_traits<float16>::from_compute(2.0f, closed).bits == 0x4000);
    CHECK(element_traits<bfloat16>::from_compute(2.0001f, closed).bits == 0x4000);
    const element_bounds positive{0.0, 1.0, true, true};
    CHECK(element_traits<float16>::from_compute(1e-9f, positive).bits == 0x0001);  // 0 excluded
  }
  SUBCASE("float and double are checked against double bounds") {
    // 0.1f is above 0.1: on an open bound of 0.1 it steps down.
    CHECK(static_cast<double>(0.1f) > 0.1);
    CHECK(static_cast<double>(element_traits<float>::from_compute(0.1f, {-0.1, 0.1, true, true})) < 0.1);
  }
  SUBCASE("unbounded values pass through; NaN stays NaN; infinity moves one step, to the largest finite") {
    CHECK(element_traits<float16>::from_compute(3.0f, kindling::unbounded).bits == 0x4200);
    CHECK(is_nan_half(element_traits<float16>::from_compute(std::nanf(""), {-1, 1, true, true}).bits));
    CHECK(element_traits<float16>::from_compute(std::numeric_limits<float>::infinity(), {-1, 1, false, false}).bits ==
          0x7bff);
    CHECK(bits_of(element_traits<float>::from_compute(2.5f, kindling::unbounded)) == bits_of(2.5f));
  }
}
