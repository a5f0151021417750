// Tests of kindling/fill.hpp: the chunked fill engine and its executors.
//
// The contract under test (DESIGN.md, "The reproducibility contract"): the bytes written
// for an element depend on its global index only, not on threads, executor, strides or
// which region is filled. The index -> counter block -> word mapping itself is checked
// against Random123's own Philox (librandom123-dev), following DEVELOPERS.md
// "Element index and words".
#include "kindling/fill.hpp"

#include <doctest/doctest.h>

#include "support/random123.hpp"

#include <algorithm>
#include <atomic>
#include <cstdint>
#include <cstring>
#include <functional>
#include <iterator>
#include <limits>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

using kindling::bfloat16;
using kindling::float16;
using kindling::region;
using kindling::shape;
using kindling::storage_order;
using kindling::strided_view;
using kindling::strides;
namespace dist = kindling::dist;
namespace domain = kindling::domain;

namespace {

template <class E>
bool same_bytes(const std::vector<E>& a, const std::vector<E>& b) {
  return a.size() == b.size() && std::memcmp(a.data(), b.data(), a.size() * sizeof(E)) == 0;
}

// The whole tensor of `global` filled serially, row-major: the reference every other
// way of filling must reproduce.
template <class E, class D>
std::vector<E> reference_fill(const shape& global, const D& d, const kindling::stream& s) {
  std::vector<E> out(global.element_count());
  kindling::fill(strided_view<E>(out.data(), global), d, s);
  return out;
}

// Row-major flat index of a multi-index in a shape.
std::uint64_t flat_index(const shape& global, const std::vector<std::uint64_t>& index) {
  std::uint64_t flat = 0;
  for (std::size_t d = 0; d < global.rank(); ++d) flat = flat * global[d] + index[d];
  return flat;
}

const kindling::stream pump = kindling::make_stream(20240611, "pump_vibration.encoder.weight");

}  // namespace

TEST_CASE("fill writes the same bytes for 1, 2, 3 and 8 threads") {
  const shape global{301, 700};  // 210700 elements: 13 chunks, the last one short
  const dist::normal d{0.0, 0.05};
  const auto serial = reference_fill<float>(global, d, pump);
  for (std::size_t threads : {1u, 2u, 3u, 8u}) {
    CAPTURE(threads);
    std::vector<float> out(serial.size(), -7.0f);
    kindling::fill(strided_view<float>(out.data(), global), d, pump, domain::values,
                   kindling::thread_executor(threads));
    CHECK_MESSAGE(same_bytes(out, serial), "threads must not change a single bit");
  }
  SUBCASE("also for double, float16 and bfloat16 and a strided view") {
    const dist::uniform u{-0.25, 0.75};
    const auto f64 = reference_fill<double>(global, u, pump);
    const auto f16 = reference_fill<float16>(global, u, pump);
    const auto b16 = reference_fill<bfloat16>(global, u, pump);
    std::vector<double> o64(f64.size());
    std::vector<float16> o16(f16.size());
    std::vector<bfloat16> ob16(b16.size());
    kindling::fill(strided_view<double>(o64.data(), global), u, pump, domain::values, kindling::thread_executor(3));
    kindling::fill(strided_view<float16>(o16.data(), global), u, pump, domain::values, kindling::thread_executor(8));
    kindling::fill(strided_view<bfloat16>(ob16.data(), global), u, pump, domain::values, kindling::thread_executor(2));
    CHECK(same_bytes(o64, f64));
    CHECK(same_bytes(o16, f16));
    CHECK(same_bytes(ob16, b16));
    // Column-major on 3 threads, compared element by element with the row-major reference.
    std::vector<double> col(f64.size());
    kindling::fill(strided_view<double>(col.data(), global, storage_order::column_major), u, pump, domain::values,
                   kindling::thread_executor(3));
    bool all_equal = true;
    for (std::uint64_t i = 0; i < global[0]; ++i)
      for (std::uint64_t j = 0; j < global[1]; ++j)
        all_equal = all_equal && std::memcmp(&col[j * global[0] + i], &f64[i * global[1] + j], sizeof(double)) == 0;
    CHECK_MESSAGE(all_equal, "element (i, j) must not depend on the storage order");
  }
}

TEST_CASE("any callable taking (n_tasks, task) is an executor, in any task order") {
  const shape global{64, 1000};  // 4 chunks
  const dist::uniform d{-1.0, 1.0};
  const auto serial = reference_fill<float>(global, d, pump);
  std::vector<float> out(serial.size());
  std::size_t seen_tasks = 0;
  // A trainer's pool stand-in: runs the tasks backwards, each on its own thread.
  auto backwards_pool = [&](std::size_t n_tasks, const std::function<void(std::size_t)>& task) {
    seen_tasks = n_tasks;
    std::vector<std::thread> workers;
    for (std::size_t k = n_tasks; k-- > 0;) workers.emplace_back([&task, k] { task(k); });
    for (std::thread& t : workers) t.join();
  };
  kindling::fill(strided_view<float>(out.data(), global), d, pump, domain::values, backwards_pool);
  CHECK(seen_tasks == 4);  // ceil(64000 / fill_chunk_elements), fixed whatever runs it
  CHECK_MESSAGE(same_bytes(out, serial), "a user executor must give the serial bytes");
}

TEST_CASE("the number of tasks depends only on the view's size") {
  std::vector<float> memory(40000);
  std::vector<std::size_t> counts;
  auto counting = [&](std::size_t n_tasks, const std::function<void(std::size_t)>& task) {
    counts.push_back(n_tasks);
    for (std::size_t k = 0; k < n_tasks; ++k) task(k);
  };
  kindling::fill(strided_view<float>(memory.data(), {40000}), dist::uniform{0.0, 1.0}, pump, domain::values, counting);
  kindling::fill(strided_view<float>(memory.data(), {200, 200}, storage_order::column_major), dist::uniform{0.0, 1.0},
                 pump, domain::values, counting);
  kindling::fill(strided_view<float>(memory.data(), {16384}), dist::uniform{0.0, 1.0}, pump, domain::values, counting);
  kindling::fill(strided_view<float>(memory.data(), {16385}), dist::uniform{0.0, 1.0}, pump, domain::values, counting);
  CHECK(counts == std::vector<std::size_t>{3, 3, 1, 2});
  CHECK(kindling::fill_chunk_elements == 16384);
}

TEST_CASE("the engine hands each element its global row-major index, whatever the region and strides") {
  // The generator writes the global index itself, so every stored value says where
  // it came from. Runs must stay within one fill_buffer_elements-aligned block.
  std::atomic<bool> runs_ok{true};
  const auto index_generator = [&](std::uint64_t first, std::size_t n, double* out) {
    if (n == 0 || n > kindling::fill_buffer_elements ||
        first / kindling::fill_buffer_elements != (first + n - 1) / kindling::fill_buffer_elements) {
      runs_ok = false;
    }
    for (std::size_t k = 0; k < n; ++k) out[k] = static_cast<double>(first + k);
  };
  const shape global{9, 40, 70};  // 25200 elements: two chunks
  SUBCASE("a region stored column-major, filled on 3 threads") {
    const region part({2, 5, 3}, {6, 33, 61});
    std::vector<double> memory(6 * 33 * 61, -1.0);
    const strided_view<double> v(memory.data(), global, part, storage_order::column_major);
    kindling::fill_generated(v, kindling::unbounded, index_generator, kindling::thread_executor(3));
    bool ok = true;
    for (std::uint64_t a = 0; a < 6; ++a)
      for (std::uint64_t b = 0; b < 33; ++b)
        for (std::uint64_t c = 0; c < 61; ++c) {
          const double expected = static_cast<double>(flat_index(global, {2 + a, 5 + b, 3 + c}));
          ok = ok && memory[a + 6 * (b + 33 * c)] == expected;
        }
    CHECK_MESSAGE(ok, "local (a, b, c) must hold global index of (2 + a, 5 + b, 3 + c)");
  }
  SUBCASE("reversed and padded axes of a whole tensor") {
    // Dimension 0 reversed, rows padded to 80: the gaps must stay untouched.
    std::vector<double> memory(9 * 40 * 80, -1.0);
    const strided_view<double> v(memory.data() + 8 * 40 * 80, global, region::whole(global), strides{-40 * 80, 80, 1});
    kindling::fill_generated(v, kindling::unbounded, index_generator);
    bool ok = true;
    bool gaps_untouched = true;
    for (std::uint64_t a = 0; a < 9; ++a)
      for (std::uint64_t b = 0; b < 40; ++b)
        for (std::uint64_t c = 0; c < 80; ++c) {
          const double stored = memory[(8 - a) * 40 * 80 + b * 80 + c];
          if (c < 70) ok = ok && stored == static_cast<double>(flat_index(global, {a, b, c}));
          else gaps_untouched = gaps_untouched && stored == -1.0;
        }
    CHECK(ok);
    CHECK_MESSAGE(gaps_untouched, "padding between rows must not be written");
  }
  CHECK(runs_ok);
}

TEST_CASE("a tensor assembled from regions filled separately equals the whole") {
  // Splits are uneven and fall inside counter groups (64 elements of a 1-word type,
  // 32 of a 2-word type) and inside Box-Muller pairs (odd offsets).
  SUBCASE("a matrix cut into 3 x 3 uneven shards, each in its own dense buffer") {
    const shape global{37, 129};
    const dist::normal d{0.5, 2.0};
    const auto whole = reference_fill<float>(global, d, pump);
    const std::uint64_t row_cuts[] = {0, 5, 17, 37};
    const std::uint64_t col_cuts[] = {0, 5, 67, 129};
    std::vector<float> assembled(whole.size(), 0.0f);
    for (int r = 0; r < 3; ++r)
      for (int c = 0; c < 3; ++c) {
        const region part({row_cuts[r], col_cuts[c]}, {row_cuts[r + 1] - row_cuts[r], col_cuts[c + 1] - col_cuts[c]});
        std::vector<float> shard(part.extent().element_count());
        kindling::fill(strided_view<float>(shard.data(), global, part), d, pump);
        for (std::uint64_t i = 0; i < part.extent()[0]; ++i)
          for (std::uint64_t j = 0; j < part.extent()[1]; ++j)
            assembled[(part.offset()[0] + i) * global[1] + part.offset()[1] + j] = shard[i * part.extent()[1] + j];
      }
    CHECK_MESSAGE(same_bytes(assembled, whole), "shards filled alone must equal the same regions of the whole");
  }
  SUBCASE("a 7 x 13 x 3 tensor filled through sub-views of one buffer, in double and bfloat16") {
    const shape global{7, 13, 3};
    const dist::truncated_normal d{0.0, 1.0, -2.0, 2.0};
    const auto whole64 = reference_fill<double>(global, d, pump);
    const auto whole16 = reference_fill<bfloat16>(global, d, pump);
    std::vector<double> parts64(whole64.size());
    std::vector<bfloat16> parts16(whole16.size());
    const strided_view<double> all64(parts64.data(), global);
    const strided_view<bfloat16> all16(parts16.data(), global);
    const region pieces[] = {region({0, 0, 0}, {7, 13, 1}), region({0, 0, 1}, {3, 13, 2}),
                             region({3, 0, 1}, {4, 6, 2}), region({3, 6, 1}, {4, 7, 2})};
    for (const region& part : pieces) {
      kindling::fill(all64.sub(part), d, pump);
      kindling::fill(all16.sub(part), d, pump, domain::values, kindling::thread_executor(2));
    }
    CHECK(same_bytes(parts64, whole64));
    CHECK(same_bytes(parts16, whole16));
  }
  SUBCASE("a vector split at odd offsets inside one counter group") {
    const shape global{1000};
    const dist::symmetric_uniform d{0.125};
    const auto whole = reference_fill<float16>(global, d, pump);
    std::vector<float16> parts(whole.size());
    const strided_view<float16> all(parts.data(), global);
    const std::uint64_t cuts[] = {0, 1, 37, 63, 64, 65, 531, 1000};
    for (std::size_t k = 0; k + 1 < std::size(cuts); ++k) {
      kindling::fill(all.sub(region({cuts[k]}, {cuts[k + 1] - cuts[k]})), d, pump);
    }
    CHECK(same_bytes(parts, whole));
  }
}

TEST_CASE("element i gets word (i % 64) / 16 of counter block 16 (i / 64) + i % 16 (format v1, checked with Random123)") {
  // DEVELOPERS.md "Element index and words" and "Uniform variates"; uniform on [0, 1)
  // is u itself (fma(1, u, 0) = u), so the stored value shows the raw word. The blocks
  // come from Random123's philox4x32 (librandom123-dev), not from our Philox.
  const shape global{11, 97};
  const region part({3, 30}, {5, 41});  // starts mid-group
  const dist::uniform d{0.0, 1.0};
  const r123::Philox4x32::key_type key = {{pump.philox_key()[0], pump.philox_key()[1]}};
  auto reference_block = [&](std::uint64_t b, std::uint32_t dom) {
    const r123::Philox4x32::ctr_type ctr = {
        {static_cast<std::uint32_t>(b), static_cast<std::uint32_t>(b >> 32), dom, kindling::format_version}};
    return r123::Philox4x32()(ctr, key);
  };
  SUBCASE("float: one word per element") {
    std::vector<float> memory(part.extent().element_count());
    kindling::fill(strided_view<float>(memory.data(), global, part, storage_order::column_major), d, pump,
                   domain::positions);
    bool ok = true;
    for (std::uint64_t a = 0; a < 5; ++a)
      for (std::uint64_t b = 0; b < 41; ++b) {
        const std::uint64_t i = (3 + a) * 97 + 30 + b;
        const auto w = reference_block(16 * (i / 64) + i % 16, domain::positions);
        const float expected = static_cast<float>(w[(i % 64) / 16] >> 8) * 0x1p-24f;
        ok = ok && memory[a + 5 * b] == expected;
      }
    CHECK(ok);
  }
  SUBCASE("float: dense blocks of several short rows, written as one stretch") {
    // A dense tensor whose rows are shorter than a counter group, and a block of whole
    // rows starting mid-group: the direct writer covers them across row ends.
    const shape small{3, 5, 40};
    const region rows({2, 0}, {7, 97});
    std::vector<float> a(small.element_count()), b(rows.extent().element_count());
    kindling::fill(strided_view<float>(a.data(), small), d, pump, domain::positions);
    kindling::fill(strided_view<float>(b.data(), global, rows), d, pump, domain::positions);
    const auto expected = [&](std::uint64_t i) {
      const auto w = reference_block(16 * (i / 64) + i % 16, domain::positions);
      return static_cast<float>(w[(i % 64) / 16] >> 8) * 0x1p-24f;
    };
    bool ok = true;
    for (std::uint64_t i = 0; i < a.size(); ++i) ok = ok && a[i] == expected(i);
    for (std::uint64_t i = 0; i < b.size(); ++i) ok = ok && b[i] == expected(2 * 97 + i);
    CHECK_MESSAGE(ok, "element i of a dense block must hold the Random123 word of global index i");
  }
  SUBCASE("double: two words per element, the first one high") {
    std::vector<double> memory(part.extent().element_count());
    kindling::fill(strided_view<double>(memory.data(), global, part), d, pump);
    bool ok = true;
    for (std::uint64_t a = 0; a < 5; ++a)
      for (std::uint64_t b = 0; b < 41; ++b) {
        const std::uint64_t i = (3 + a) * 97 + 30 + b;
        const auto w = reference_block(16 * (i / 32) + i % 16, domain::values);
        const std::uint64_t slot = (i % 32) / 16;
        const std::uint64_t bits = (std::uint64_t{w[2 * slot]} << 32) | w[2 * slot + 1];
        const double expected = static_cast<double>(bits >> 11) * 0x1p-53;
        ok = ok && memory[a * 41 + b] == expected;
      }
    CHECK(ok);
  }
}

TEST_CASE("a bad distribution is refused before anything is written") {
  std::vector<float> memory(500, 3.25f);
  const std::vector<float> before = memory;
  const strided_view<float> v(memory.data(), {20, 25});
  // sample.hpp reports bad parameters as std::domain_error naming the field.
  SUBCASE("empty uniform interval") {
    CHECK_THROWS_WITH_AS(kindling::fill(v, dist::uniform{1.0, 0.0}, pump), doctest::Contains("kindling::dist::uniform: argument 'hi' = 0, expected"),
                         std::domain_error);
  }
  SUBCASE("non-finite standard deviation") {
    CHECK_THROWS_WITH_AS(kindling::fill(v, dist::normal{0.0, std::numeric_limits<double>::quiet_NaN()}, pump,
                                        domain::values, kindling::thread_executor(3)),
                         doctest::Contains("kindling::dist::normal: argument 'stddev' = nan, expected"), std::domain_error);
  }
  SUBCASE("truncation cuts in the wrong order, on a region view") {
    const strided_view<float> part = v.sub(region({3, 4}, {5, 6}));
    CHECK_THROWS_AS(kindling::fill(part, dist::truncated_normal{0.0, 1.0, 2.0, -2.0}, pump), std::domain_error);
  }
  CHECK_MESSAGE(memory == before, "a refused fill must leave the memory as it was");
}

TEST_CASE("thread_executor runs every task once and rethrows a task's exception in the caller") {
  SUBCASE("every task once") {
    std::vector<std::atomic<int>> calls(1000);
    kindling::thread_executor(3)(calls.size(), [&](std::size_t k) { ++calls[k]; });
    CHECK(std::all_of(calls.begin(), calls.end(), [](const std::atomic<int>& c) { return c == 1; }));
  }
  SUBCASE("an exception reaches the caller") {
    auto failing = [](std::size_t k) {
      if (k == 5) throw std::runtime_error("task 5 failed");
    };
    CHECK_THROWS_WITH_AS(kindling::thread_executor(4)(20, failing), "task 5 failed", std::runtime_error);
    CHECK_THROWS_AS(kindling::serial_executor{}(20, failing), std::runtime_error);
  }
  SUBCASE("zero threads is refused") {
    CHECK_THROWS_WITH_AS(kindling::thread_executor(0), doctest::Contains("kindling::thread_executor: argument 'threads' = 0, expected at least 1 thread"),
                         std::invalid_argument);
    CHECK(kindling::thread_executor().threads() >= 1);
  }
}

#if defined(_OPENMP)
TEST_CASE("openmp_executor writes the serial bytes") {
  const shape global{100, 1000};
  const auto serial = reference_fill<float>(global, dist::normal{0.0, 1.0}, pump);
  std::vector<float> out(serial.size());
  kindling::fill(strided_view<float>(out.data(), global), dist::normal{0.0, 1.0}, pump, domain::values,
                 kindling::openmp_executor{});
  CHECK(same_bytes(out, serial));
}
#endif
