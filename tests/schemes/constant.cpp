// Tests of schemes/constant.hpp: constant and zeros write the value rounded to nearest
// (IEEE 754 round to nearest, ties to even) in every element type, inside the view's
// region only, whatever the executor; a non-finite value is refused before anything is
// written. The expected bit patterns: float 0x3dcccccd and binary16 0x2e66 for 0.1 are
// numpy.float32(0.1) and numpy.float16(0.1) viewed as integers (numpy 1.24 with
// /usr/bin/python3, REFERENCES.md); bfloat16 0x3dcd is the float's upper half rounded to nearest
// even (0x3dcc_cccd: the dropped half 0xcccd is above 0x8000, so round up).
#include "kindling/schemes/constant.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/executor.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
template <class E>
std::vector<E> constant_tensor(double value, std::uint64_t n) {
  std::vector<E> w(n);
  initialize(strided_view<E>(w.data(), shape(n)), weight_info{}, constant{value}, make_stream(3, "belt.bias"));
  return w;
}
}  // namespace

TEST_CASE("constant writes the value rounded to nearest in every element type") {
  for (float x : constant_tensor<float>(0.1, 37)) {
    std::uint32_t bits = 0;
    std::memcpy(&bits, &x, sizeof bits);
    CHECK(bits == 0x3dcccccdu);
  }
  for (double x : constant_tensor<double>(0.1, 37)) CHECK(x == 0.1);
  for (float16 x : constant_tensor<float16>(0.1, 37)) CHECK(x.bits == 0x2e66);
  for (bfloat16 x : constant_tensor<bfloat16>(0.1, 37)) CHECK(x.bits == 0x3dcd);
  for (float x : constant_tensor<float>(-2.5, 5)) CHECK(x == -2.5f);  // exact in every type
}

TEST_CASE("zeros and constant write only the view's region, with any executor") {
  // A 6 x 8 buffer holding the 4 x 5 block at offset (1, 2) of a 10 x 10 tensor.
  std::vector<double> memory(6 * 8, 7.0);
  const strided_view<double> block(memory.data() + 8 + 1, shape(10, 10), region(shape(1, 2), shape(4, 5)),
                                   strides(8, 1));
  initialize(block, weight_info{}, zeros{}, make_stream(1, "pump.bias"), thread_executor(3));
  for (std::size_t r = 0; r < 6; ++r) {
    for (std::size_t c = 0; c < 8; ++c) {
      const bool inside = r >= 1 && r < 5 && c >= 1 && c < 6;
      const double x = memory[r * 8 + c];
      CAPTURE(r);
      CAPTURE(c);
      CHECK(x == (inside ? 0.0 : 7.0));
      if (inside) CHECK_FALSE(std::signbit(x));  // +0, not -0
    }
  }
  initialize(block, weight_info{}, constant{-1.25}, make_stream(1, "pump.bias"), serial_executor{});
  CHECK(memory[8 + 1] == -1.25);
  CHECK(memory[4 * 8 + 5] == -1.25);
  CHECK(memory[0] == 7.0);
}

TEST_CASE("a non-finite constant is refused, naming the value, before anything is written") {
  std::vector<float> w(8, 4.0f);
  for (double bad : {std::nan(""), HUGE_VAL, -HUGE_VAL}) {
    CAPTURE(bad);
    const std::string m = message_of<std::domain_error>([&] {
      initialize(strided_view<float>(w.data(), shape(8)), weight_info{}, constant{bad}, make_stream(2, "x"));
    });
    CHECK(mentions(m, "kindling::constant: argument 'value' = "));
    CHECK(mentions(m, "expected a finite number"));
    for (float x : w) CHECK(x == 4.0f);
  }
  CHECK(constant{}.name() == "constant");
  CHECK(zeros{}.name() == "zeros");
}
