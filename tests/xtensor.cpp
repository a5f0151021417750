// Tests of kindling/xtensor.hpp: views of xtensor containers, adapted memory and
// strided views, and fill() on them.
#include "kindling/xtensor.hpp"

#include <doctest/doctest.h>

#include <xtensor/xadapt.hpp>
#include <xtensor/xarray.hpp>
#include <xtensor/xstrided_view.hpp>
#include <xtensor/xtensor.hpp>
#include <xtensor/xview.hpp>

#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <vector>

using kindling::shape;
using kindling::strided_view;
namespace dist = kindling::dist;
namespace domain = kindling::domain;

namespace {

const kindling::stream pump = kindling::make_stream(5, "pump_vibration.spectrum_conv.weight");

template <class E, class D>
std::vector<E> raw_fill(const shape& global, const D& d) {
  std::vector<E> out(global.element_count());
  kindling::fill(strided_view<E>(out.data(), global), d, pump);
  return out;
}

}  // namespace

TEST_CASE("an xarray gets the bytes of raw row-major memory of its shape") {
  const dist::normal d{0.0, 0.2};
  const auto reference = raw_fill<float>({7, 13, 3}, d);
  xt::xarray<float> a = xt::zeros<float>({7, 13, 3});
  kindling::fill(a, d, pump);
  CHECK(kindling::view_of(a).global_shape() == shape{7, 13, 3});
  CHECK(std::memcmp(a.data(), reference.data(), reference.size() * sizeof(float)) == 0);
  SUBCASE("and on 3 threads") {
    xt::xarray<float> b = xt::zeros<float>({7, 13, 3});
    kindling::fill(b, d, pump, domain::values, kindling::thread_executor(3));
    CHECK(b == a);
  }
}

TEST_CASE("a column-major xtensor holds at (i, j, k) what the row-major one does") {
  const dist::uniform d{-0.3, 0.3};
  const auto reference = raw_fill<double>({5, 4, 6}, d);
  xt::xtensor<double, 3, xt::layout_type::column_major> t({5, 4, 6});
  kindling::fill(t, d, pump);
  CHECK(kindling::view_of(t).memory_strides() == kindling::strides{1, 5, 20});
  bool ok = true;
  for (std::size_t i = 0; i < 5; ++i)
    for (std::size_t j = 0; j < 4; ++j)
      for (std::size_t k = 0; k < 6; ++k) ok = ok && t(i, j, k) == reference[(i * 4 + j) * 6 + k];
  CHECK(ok);
}

TEST_CASE("adapted memory is filled like raw memory") {
  const dist::symmetric_uniform d{0.05};
  const auto reference = raw_fill<float>({32, 9}, d);
  std::vector<float> memory(32 * 9);
  auto adapted = xt::adapt(memory.data(), memory.size(), xt::no_ownership(), std::vector<std::size_t>{32, 9});
  kindling::fill(adapted, d, pump);
  CHECK(memory == reference);
}

TEST_CASE("xtensor views fill through their strides and can be regions of a global shape") {
  const dist::truncated_normal d{0.0, 1.0, -2.0, 2.0};
  SUBCASE("every other row of an array is a dense {10, 30} tensor at stride 60") {
    const auto reference = raw_fill<float>({10, 30}, d);
    xt::xarray<float> a = xt::ones<float>({20, 30}) * 9.0f;
    auto even_rows = xt::view(a, xt::range(0, 20, 2), xt::all());
    CHECK(kindling::view_of(even_rows).memory_strides() == kindling::strides{60, 1});
    kindling::fill(even_rows, d, pump);
    bool ok = true;
    bool odd_untouched = true;
    for (std::size_t i = 0; i < 20; ++i)
      for (std::size_t j = 0; j < 30; ++j) {
        if (i % 2 == 0) ok = ok && a(i, j) == reference[(i / 2) * 30 + j];
        else odd_untouched = odd_untouched && a(i, j) == 9.0f;
      }
    CHECK(ok);
    CHECK_MESSAGE(odd_untouched, "rows outside the view must not be written");
  }
  SUBCASE("blocks taken with xt::view and xt::strided_view, placed in the global shape, assemble into the whole") {
    const shape global{20, 30};
    const auto whole = raw_fill<double>(global, d);
    xt::xarray<double> a = xt::zeros<double>({20, 30});
    kindling::fill(kindling::view_of(xt::view(a, xt::range(0, 7), xt::all())).as_part_of(global, {0, 0}), d, pump);
    kindling::fill(kindling::view_of(xt::view(a, xt::range(7, 20), xt::range(0, 17))).as_part_of(global, {7, 0}), d,
                   pump);
    kindling::fill(kindling::view_of(xt::strided_view(a, {xt::range(7, 20), xt::range(17, 30)})).as_part_of(global, {7, 17}),
                   d, pump, domain::values, kindling::thread_executor(2));
    CHECK(std::memcmp(a.data(), whole.data(), whole.size() * sizeof(double)) == 0);
  }
}

TEST_CASE("an empty xtensor container is refused and a bad distribution writes nothing") {
  xt::xarray<float> empty = xt::zeros<float>({4, 0});
  CHECK_THROWS_WITH_AS(kindling::view_of(empty), doctest::Contains("extent 0 in dimension 1"), std::invalid_argument);
  xt::xarray<float> a = xt::ones<float>({4, 4});
  CHECK_THROWS_AS(kindling::fill(a, dist::normal{0.0, -1.0}, pump), std::domain_error);
  CHECK(a == xt::xarray<float>(xt::ones<float>({4, 4})));
}
