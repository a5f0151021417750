// Calls from many threads at once (issue 9 item 3; run under ThreadSanitizer by the
// tsan preset): the library has no global mutable state, so threads that initialize
// their own buffers from shared const layers and streams, and threads that audit one
// shared const tensor, must each get exactly the serial result, with no data race.
#include <doctest/doctest.h>

#include <cstdint>
#include <string>
#include <thread>
#include <vector>

#include "kindling/audit/conformance.hpp"
#include "kindling/audit/identify.hpp"
#include "kindling/audit/symmetry.hpp"
#include "kindling/schemes/fan_scaled.hpp"

using namespace kindling;

TEST_CASE("threads initializing their own buffers from shared streams get the serial bytes") {
  const dense layer(256, 64);
  const stream s = make_stream(20261202, "turbine.encoder.weight");
  std::vector<float> serial(64 * 256);
  initialize(strided_view<float>(serial.data(), shape(64, 256)), layer, he_uniform{}, s);
  constexpr int threads = 4;
  std::vector<std::vector<float>> out(threads, std::vector<float>(serial.size()));
  std::vector<std::thread> pool;
  for (int t = 0; t < threads; ++t) {
    pool.emplace_back([&, t] {
      // each thread also uses a thread_executor of its own inside: nested parallelism
      initialize(strided_view<float>(out[static_cast<std::size_t>(t)].data(), shape(64, 256)), layer, he_uniform{}, s,
                 thread_executor(2));
    });
  }
  for (std::thread& th : pool) th.join();
  for (const auto& o : out) CHECK(o == serial);
}

TEST_CASE("threads auditing one shared tensor get the same reports") {
  const dense layer(512, 128);
  std::vector<float> w(128 * 512);
  initialize(strided_view<float>(w.data(), shape(128, 512)), layer, glorot_normal{}, make_stream(5, "turbine.head"));
  const strided_view<const float> v(w.data(), shape(128, 512));
  const std::string expected = check_scheme(v, layer, glorot_normal{}).explain();
  const std::string expected_best = identify_scheme(v, layer).best()->text();
  constexpr int threads = 4;
  std::vector<std::string> got(threads), best(threads), symmetry(threads);
  std::vector<std::thread> pool;
  for (int t = 0; t < threads; ++t) {
    pool.emplace_back([&, t] {
      const auto k = static_cast<std::size_t>(t);
      got[k] = check_scheme(v, layer, glorot_normal{}).explain();
      best[k] = identify_scheme(v, layer).best()->text();
      symmetry[k] = check_symmetry(v).explain();
    });
  }
  for (std::thread& th : pool) th.join();
  for (int t = 0; t < threads; ++t) {
    const auto k = static_cast<std::size_t>(t);
    CHECK(got[k] == expected);
    CHECK(best[k] == expected_best);
    CHECK(symmetry[k] == symmetry[0]);
  }
}
