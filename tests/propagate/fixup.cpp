// Tests of propagate/fixup.hpp against Zhang, Dauphin & Ma, ICLR 2019, sec. 3.
#include "kindling/propagate/fixup.hpp"

#include <doctest/doctest.h>

#include <cmath>
#include <vector>

#include "../support/errors.hpp"

using namespace kindling;

TEST_CASE("the Fixup factor is L^(-1/(2m-2)) (Zhang et al. 2019)") {
  CHECK(fixup_factor(16, 2) == doctest::Approx(0.25));             // 16^(-1/2)
  CHECK(fixup_factor(8, 3) == doctest::Approx(std::pow(8.0, -0.25)));
  CHECK(fixup_factor(1, 5) == 1.0);
}

TEST_CASE("apply_fixup scales all but the last branch layer and zeroes the last") {
  std::vector<double> a(6, 2.0), b(4, 3.0);
  const std::vector<strided_view<double>> branch{strided_view<double>(a.data(), shape(2, 3)),
                                                 strided_view<double>(b.data(), shape(2, 2))};
  CHECK(apply_fixup(branch, 16) == doctest::Approx(0.25));
  for (double x : a) CHECK(x == doctest::Approx(0.5));
  for (double x : b) CHECK(x == 0.0);
}

TEST_CASE("Fixup refuses no branches and one-layer branches, writing nothing") {
  std::vector<double> a(3, 1.0);
  const std::vector<strided_view<double>> one{strided_view<double>(a.data(), shape(3))};
  CHECK(kindling_test::mentions(kindling_test::message_of<std::invalid_argument>([&] { apply_fixup(one, 4); }),
                                "'layers_per_branch' = 1"));
  CHECK(a[0] == 1.0);
  CHECK(kindling_test::mentions(kindling_test::message_of<std::invalid_argument>([] { fixup_factor(0, 2); }),
                                "'branches' = 0"));
}
