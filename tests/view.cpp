// Tests of kindling/view.hpp: shapes, regions, strides and the validation of views.
#include "kindling/view.hpp"

#include <doctest/doctest.h>

#include "support/errors.hpp"

#include <cstdint>
#include <stdexcept>
#include <string>
#include <vector>

using kindling::region;
using kindling::shape;
using kindling::storage_order;
using kindling::strided_view;
using kindling::strides;

using kindling_test::mentions;
using kindling_test::message_of;

TEST_CASE("a shape holds up to max_rank extents and counts its elements") {
  const shape s{7, 13, 3};
  CHECK(s.rank() == 3);
  CHECK(s[1] == 13);
  CHECK(s.element_count() == 273);
  CHECK(s.text() == "[7, 13, 3]");
  CHECK(shape{}.element_count() == 1);  // the empty product
  const std::vector<long> dims{2, 3, 4, 5, 6, 7, 8, 9};
  const shape full(dims.begin(), dims.end());
  CHECK(full.rank() == kindling::max_rank);
  CHECK(full.element_count() == 362880);  // 9! / 1
  CHECK(shape{std::int64_t{4}, 5u} == shape{4, 5});
  CHECK(shape{4, 5} != shape{5, 4});
}

TEST_CASE("a shape rejects a rank above max_rank, negative extents and overflowing counts") {
  SUBCASE("rank 9 is a length_error naming the argument and the rank") {
    const std::string m = message_of<std::length_error>([] { shape s{1, 1, 1, 1, 1, 1, 1, 1, 1}; });
    CHECK_MESSAGE(mentions(m, "kindling::shape: argument 'shape' = 9 entries, expected a rank of at most 8"), m);
    CHECK_MESSAGE(mentions(m, "at most 8"), m);
    const std::vector<int> nine(9, 1);
    CHECK_THROWS_AS(shape(nine.begin(), nine.end()), std::length_error);
  }
  SUBCASE("a negative extent is an invalid_argument naming its value") {
    const int rows = -3;
    const std::string m = message_of<std::invalid_argument>([&] { shape s{rows, 4}; });
    CHECK_MESSAGE(mentions(m, "kindling::shape: argument 'shape[0]' = -3, expected a count >= 0"), m);
  }
  SUBCASE("an element count beyond 2^64 - 1 is a length_error") {
    const shape s{std::uint64_t{1} << 32, std::uint64_t{1} << 32};
    const std::string m = message_of<std::length_error>([&] { (void)s.element_count(); });
    CHECK_MESSAGE(mentions(m, "[4294967296, 4294967296]"), m);
    // 2^32 (2^32 - 1) = 2^64 - 2^32 still fits.
    CHECK((shape{std::uint64_t{1} << 32, (std::uint64_t{1} << 32) - 1}.element_count()) == 0xffffffff00000000u);
  }
}

TEST_CASE("dense strides follow row-major and column-major order") {
  CHECK(strides::row_major({7, 13, 3}) == strides{39, 3, 1});
  CHECK(strides::column_major({7, 13, 3}) == strides{1, 7, 91});
  CHECK(strides::row_major({5}) == strides{1});
}

TEST_CASE("a view of a whole tensor covers the global shape at dense strides") {
  std::vector<float> memory(7 * 13 * 3);
  SUBCASE("row-major") {
    const strided_view<float> v(memory.data(), {7, 13, 3});
    CHECK(v.rank() == 3);
    CHECK(v.is_whole());
    CHECK(v.size() == 273);
    CHECK(v.memory_strides() == strides{39, 3, 1});
    CHECK(v.part() == region::whole({7, 13, 3}));
  }
  SUBCASE("column-major") {
    const strided_view<float> v(memory.data(), {7, 13, 3}, storage_order::column_major);
    CHECK(v.memory_strides() == strides{1, 7, 91});
    CHECK(v.global_shape() == shape{7, 13, 3});
  }
}

TEST_CASE("a view of a region stores only the region and keeps the global shape") {
  std::vector<double> memory(3 * 5);
  const strided_view<double> v(memory.data(), {10, 20}, region({4, 15}, {3, 5}));
  CHECK(v.global_shape() == shape{10, 20});
  CHECK(v.size() == 15);
  CHECK(!v.is_whole());
  CHECK(v.memory_strides() == strides{5, 1});
  const strided_view<double> c(memory.data(), {10, 20}, region({4, 15}, {3, 5}), storage_order::column_major);
  CHECK(c.memory_strides() == strides{1, 3});
}

TEST_CASE("sub() narrows a view to a region of it in global coordinates, sharing memory") {
  std::vector<int> memory(6 * 8);
  const strided_view<int> whole(memory.data(), {6, 8});
  const strided_view<int> part = whole.sub(region({2, 3}, {3, 4}));
  CHECK(part.data() == memory.data() + 2 * 8 + 3);
  CHECK(part.memory_strides() == strides{8, 1});
  const strided_view<int> inner = part.sub(region({3, 5}, {2, 2}));
  CHECK(inner.data() == memory.data() + 3 * 8 + 5);
  SUBCASE("a region outside the view is refused") {
    const std::string m = message_of<std::invalid_argument>([&] { (void)part.sub(region({1, 3}, {2, 2})); });
    CHECK_MESSAGE(mentions(m, "argument 'region' = offset [1, 3] extent [2, 2], expected a region inside this view's region"), m);
    CHECK_THROWS_AS((void)part.sub(region({2, 5}, {3, 3})), std::invalid_argument);
  }
}

TEST_CASE("as_part_of() places a view's memory as a region of a larger global shape") {
  std::vector<float> memory(3 * 5);
  const strided_view<float> shard(memory.data(), {3, 5}, storage_order::column_major);
  const strided_view<float> placed = shard.as_part_of({10, 20}, {4, 15});
  CHECK(placed.global_shape() == shape{10, 20});
  CHECK(placed.part() == region({4, 15}, {3, 5}));
  CHECK(placed.memory_strides() == strides{1, 3});
  CHECK(placed.data() == memory.data());
  const std::string m = message_of<std::invalid_argument>([&] { (void)shard.as_part_of({10, 20}, {8, 15}); });
  CHECK_MESSAGE(mentions(m, "covers indices 8..8+3-1 of dimension 0"), m);
  CHECK_THROWS_AS((void)shard.as_part_of({10, 20, 1}, {0, 0, 0}), std::invalid_argument);
}

TEST_CASE("a writable view converts to a read-only one over the same memory") {
  std::vector<float> memory(12);
  const strided_view<float> v(memory.data(), {3, 4}, storage_order::column_major);
  const strided_view<const float> r = v;
  CHECK(r.data() == memory.data());
  CHECK(r.memory_strides() == v.memory_strides());
  CHECK(r.part() == v.part());
}

TEST_CASE("strides may be negative, permuted or padded as long as no two elements share memory") {
  std::vector<float> memory(64);
  const region all = region::whole({4, 4});
  SUBCASE("reversed rows") {
    const strided_view<float> v(memory.data() + 12, {4, 4}, all, strides{-4, 1});
    CHECK(v.stride(0) == -4);
  }
  SUBCASE("transposed") { CHECK_NOTHROW(strided_view<float>(memory.data(), {4, 4}, all, strides{1, 4})); }
  SUBCASE("padded rows") { CHECK_NOTHROW(strided_view<float>(memory.data(), {4, 4}, all, strides{10, 1})); }
  SUBCASE("extent-1 dimensions may have any stride (xtensor writes 0 there)") {
    CHECK_NOTHROW(strided_view<float>(memory.data(), {4, 1}, region::whole({4, 1}), strides{1, 0}));
  }
}

TEST_CASE("a view rejects each bad argument with an exception naming it") {
  std::vector<float> memory(64, 1.5f);
  const std::vector<float> before = memory;
  SUBCASE("rank 0") {
    const std::string m = message_of<std::invalid_argument>([&] { strided_view<float> v(memory.data(), shape{}); });
    CHECK_MESSAGE(mentions(m, "kindling::strided_view: argument 'shape' = [] (rank 0), expected a rank from 1 to 8"), m);
  }
  SUBCASE("a zero extent") {
    const std::string m = message_of<std::invalid_argument>([&] { strided_view<float> v(memory.data(), {4, 0}); });
    CHECK_MESSAGE(mentions(m, "kindling::strided_view: argument 'shape' = [4, 0], expected every extent >= 1 (extent 0 in dimension 1"), m);
  }
  SUBCASE("an element count that overflows") {
    const std::string m = message_of<std::length_error>(
        [&] { strided_view<float> v(memory.data(), {std::uint64_t{1} << 40, std::uint64_t{1} << 40}); });
    CHECK_MESSAGE(mentions(m, "2^64 - 1"), m);
  }
  SUBCASE("a null pointer") {
    const std::string m = message_of<std::invalid_argument>([&] { strided_view<float> v(nullptr, {4, 4}); });
    CHECK_MESSAGE(mentions(m, "argument 'data' = a null pointer, expected memory to write to (the region has 16 elements)"), m);
  }
  SUBCASE("a region that leaves the global shape") {
    const std::string m = message_of<std::invalid_argument>(
        [&] { strided_view<float> v(memory.data(), {8, 8}, region({6, 0}, {3, 8})); });
    CHECK_MESSAGE(mentions(m, "argument 'region' = offset [6, 0] extent [3, 8], expected a region inside the global shape [8, 8] (it covers indices 6..6+3-1 of dimension 0)"), m);
    CHECK_THROWS_AS(strided_view<float>(memory.data(), {8, 8}, region({8, 0}, {1, 1})), std::invalid_argument);
    // An offset near 2^64 must not wrap around into the shape.
    CHECK_THROWS_AS(strided_view<float>(memory.data(), {8, 8}, region({~std::uint64_t{0}, 0}, {2, 1})),
                    std::invalid_argument);
  }
  SUBCASE("an empty region") {
    const std::string m = message_of<std::invalid_argument>(
        [&] { strided_view<float> v(memory.data(), {8, 8}, region({0, 0}, {0, 8})); });
    CHECK_MESSAGE(mentions(m, "extent 0 in dimension 0"), m);
  }
  SUBCASE("a region of another rank") {
    const std::string m = message_of<std::invalid_argument>(
        [&] { strided_view<float> v(memory.data(), {8, 8}, region({0}, {8})); });
    CHECK_MESSAGE(mentions(m, "expected offset and extent of rank 2 like the global shape [8, 8]"), m);
  }
  SUBCASE("strides of another rank") {
    const std::string m = message_of<std::invalid_argument>(
        [&] { strided_view<float> v(memory.data(), {8, 8}, region::whole({8, 8}), strides{1}); });
    CHECK_MESSAGE(mentions(m, "argument 'strides' = [1], expected rank 2 like the region"), m);
  }
  SUBCASE("strides that alias two elements") {
    // (0, 2) and (1, 0) both land 2 elements from the start.
    const std::string m = message_of<std::invalid_argument>(
        [&] { strided_view<float> v(memory.data(), {4, 4}, region::whole({4, 4}), strides{2, 1}); });
    CHECK_MESSAGE(mentions(m, "argument 'strides' = [2, 1], expected strides that give every element"), m);
    CHECK_THROWS_AS(strided_view<float>(memory.data(), {4, 4}, region::whole({4, 4}), strides{0, 1}),
                    std::invalid_argument);
    CHECK_THROWS_AS(strided_view<float>(memory.data(), {4, 4}, region::whole({4, 4}), strides{-1, 1}),
                    std::invalid_argument);
  }
  SUBCASE("strides whose span leaves ptrdiff_t") {
    const std::string m = message_of<std::length_error>([&] {
      strided_view<float> v(memory.data(), {4, 4}, region::whole({4, 4}), strides{std::int64_t{1} << 62, 1});
    });
    CHECK_MESSAGE(mentions(m, "span more than 2^63 - 1 elements"), m);
  }
  CHECK_MESSAGE(memory == before, "a refused view must leave the memory as it was");
}
