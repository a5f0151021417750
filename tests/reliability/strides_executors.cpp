// Views whose strides would overflow the fill's stepping, and executors that break
// their promise (throw part way, skip tasks, call tasks that do not exist): each is
// refused with a message that says what happened, and the fill never writes outside
// the view (rows of tests/reliability/README.md).
#include <doctest/doctest.h>

#include <cstdint>
#include <cstring>
#include <exception>
#include <functional>
#include <limits>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/fill.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {
constexpr float sentinel = -7.25f;
constexpr std::int64_t most = std::numeric_limits<std::int64_t>::max();
constexpr std::int64_t least = std::numeric_limits<std::int64_t>::min();
constexpr std::size_t chunks = 5;  // a tensor of five executor tasks
const stream conveyor = make_stream(41, "conveyor.belt.w");
const dist::normal values{0.0, 1.0};

bool is_sentinel(float x) { return std::memcmp(&x, &sentinel, sizeof x) == 0; }

// The values a correct serial fill writes into a [chunks, fill_chunk_elements] tensor.
std::vector<float> serial_values() {
  std::vector<float> out(chunks * fill_chunk_elements);
  fill(strided_view<float>(out.data(), {chunks, fill_chunk_elements}), values, conveyor);
  return out;
}

// For each chunk: true if it holds the serial values, false if it holds only sentinels;
// a chunk holding anything else fails the test.
std::vector<bool> written_chunks(const std::vector<float>& memory) {
  const std::vector<float> expected = serial_values();
  std::vector<bool> written;
  for (std::size_t c = 0; c < chunks; ++c) {
    const std::size_t at = c * fill_chunk_elements;
    const bool same = std::memcmp(&memory[at], &expected[at], fill_chunk_elements * sizeof(float)) == 0;
    bool untouched = true;
    for (std::size_t i = 0; i < fill_chunk_elements; ++i) untouched = untouched && is_sentinel(memory[at + i]);
    CHECK_MESSAGE((same || untouched), "chunk " << c << " is neither written nor untouched");
    written.push_back(same);
  }
  return written;
}

// Fills the tensor (followed by a guard of one more chunk) on exec; returns the
// fill_incomplete it throws, after checking that the guard was not written. The
// message of the exception nested inside it, if any, goes to *nested.
template <class Exec>
fill_incomplete refused_fill(std::vector<float>& memory, Exec exec, std::string* nested = nullptr) {
  memory.assign((chunks + 1) * fill_chunk_elements, sentinel);
  const strided_view<float> v(memory.data(), {chunks, fill_chunk_elements});
  try {
    fill(v, values, conveyor, domain::values, exec);
  } catch (const fill_incomplete& e) {
    bool guard = true;
    for (std::size_t i = chunks * fill_chunk_elements; i < memory.size(); ++i) guard = guard && is_sentinel(memory[i]);
    CHECK_MESSAGE(guard, "the fill wrote past the end of its view");
    memory.resize(chunks * fill_chunk_elements);
    if (nested != nullptr) *nested = message_of<std::exception>([&] { std::rethrow_if_nested(e); });
    return e;
  }
  FAIL("expected kindling::fill_incomplete");
  return fill_incomplete("", 0, 0);
}
}  // namespace

TEST_CASE("a stride whose product overflows on any axis, a size-1 axis included, is refused") {
  float cell[4] = {0, 0, 0, 0};
  // The innermost axis has extent 1: the fill adds its stride before wrapping.
  std::string m = message_of<std::length_error>(
      [&] { strided_view<float>(cell, {4, 1}, region::whole({4, 1}), strides(1, most)); });
  CHECK(mentions(m, "argument 'strides' = [1, 9223372036854775807]"));
  CHECK(mentions(m, "dimension 1 has stride 9223372036854775807 and extent 1"));
  CHECK(mentions(m, "expected |stride| * extent + 3 (the span of the region) to fit std::ptrdiff_t"));
  // The most negative stride has no positive counterpart.
  m = message_of<std::length_error>(
      [&] { strided_view<float>(cell, {1, 4}, region::whole({1, 4}), strides(least, 1)); });
  CHECK(mentions(m, "dimension 0 has stride -9223372036854775808 and extent 1"));
  // Fits alone, but not with the 3 elements the other axis spans.
  m = message_of<std::length_error>(
      [&] { strided_view<float>(cell, {1, 4}, region::whole({1, 4}), strides(most - 2, 1)); });
  CHECK(mentions(m, "dimension 0 has stride 9223372036854775805 and extent 1"));
  // A region of a larger tensor: the extent-1 axis of the region is checked too.
  m = message_of<std::length_error>(
      [&] { strided_view<float>(cell, {8, 4}, region({5, 0}, {1, 4}), strides(-most, 1)); });
  CHECK(mentions(m, "dimension 0 has stride -9223372036854775807"));
}

TEST_CASE("a large stride on a size-1 axis that fits is accepted and fills the serial values") {
  std::vector<float> dense(4), spread(4, sentinel);
  fill(strided_view<float>(dense.data(), {1, 4}), values, conveyor);
  fill(strided_view<float>(spread.data(), {1, 4}, region::whole({1, 4}), strides(std::int64_t{1} << 62, 1)),
       values, conveyor);
  CHECK(std::memcmp(dense.data(), spread.data(), sizeof(float) * 4) == 0);
}

TEST_CASE("an executor that throws after k tasks: fill_incomplete says how many, the rest is unspecified") {
  std::vector<float> memory;
  const auto throws_after_two = [](std::size_t n, const std::function<void(std::size_t)>& task) {
    for (std::size_t k = 0; k < n; ++k) {
      if (k == 2) throw std::runtime_error("pool of the heat exchanger trainer shut down");
      task(k);
    }
  };
  std::string nested;
  const fill_incomplete e = refused_fill(memory, throws_after_two, &nested);
  const std::string m = e.what();
  CHECK(mentions(m, "kindling::fill: the executor threw (pool of the heat exchanger trainer shut down)"));
  CHECK(mentions(m, "2 of 5 tasks"));
  CHECK(mentions(m, "contents are unspecified"));
  CHECK(e.tasks_done() == 2);
  CHECK(e.tasks() == chunks);
  // The executor's own exception is nested inside.
  CHECK(nested == "pool of the heat exchanger trainer shut down");
  // The documented state: completed chunks written, the others as they were.
  CHECK(written_chunks(memory) == std::vector<bool>{true, true, false, false, false});
}

TEST_CASE("an executor that returns without running every task is detected") {
  std::vector<float> memory;
  SUBCASE("the odd tasks skipped") {
    const auto evens = [](std::size_t n, const std::function<void(std::size_t)>& task) {
      for (std::size_t k = 0; k < n; k += 2) task(k);
    };
    const fill_incomplete e = refused_fill(memory, evens);
    CHECK(mentions(e.what(), "the executor returned with 3 of 5 tasks"));
    CHECK(mentions(e.what(), "expected an executor that calls task(k) once for every k in [0, 5)"));
    CHECK(written_chunks(memory) == std::vector<bool>{true, false, true, false, true});
  }
  SUBCASE("the right number of calls, all to task 0") {
    const auto first_only = [](std::size_t n, const std::function<void(std::size_t)>& task) {
      for (std::size_t k = 0; k < n; ++k) task(0);
    };
    const fill_incomplete e = refused_fill(memory, first_only);
    CHECK(e.tasks_done() == 1);
    CHECK(written_chunks(memory) == std::vector<bool>{true, false, false, false, false});
  }
  SUBCASE("no task run at all") {
    const auto idle = [](std::size_t, const std::function<void(std::size_t)>&) {};
    CHECK(refused_fill(memory, idle).tasks_done() == 0);
    CHECK(written_chunks(memory) == std::vector<bool>(chunks, false));
  }
}

TEST_CASE("an executor that calls a task number beyond n_tasks is stopped before it writes") {
  std::vector<float> memory;
  const auto one_too_many = [](std::size_t n, const std::function<void(std::size_t)>& task) {
    for (std::size_t k = 0; k <= n; ++k) task(k);
  };
  const fill_incomplete e = refused_fill(memory, one_too_many);
  CHECK(mentions(e.what(), "the executor called task 5; expected a task number from 0 to 4"));
  CHECK(e.tasks_done() == chunks);
  CHECK(written_chunks(memory) == std::vector<bool>(chunks, true));
}
