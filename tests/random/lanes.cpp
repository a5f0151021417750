// Tests of random/detail/lanes.hpp (the dispatch to avx512.hpp, avx2.hpp and their shared
// lanes_body.hpp) and the fast paths of fill.hpp: every vector path
// (each instruction set this CPU runs, forced on in turn) gives the bits of the scalar
// path, for every distribution, both compute types and element types, odd offsets and
// lengths; the vector Philox is checked against Random123's philox4x32 (Debian
// librandom123-dev) directly. Exact comparisons only, so no false-alarm rate.
#include <doctest/doctest.h>

#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>
#include <string>
#include <type_traits>
#include <vector>

#include "kindling/element.hpp"
#include "kindling/fill.hpp"
#include "kindling/random/detail/lanes.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/random/stream.hpp"
#include "kindling/view.hpp"

#include "../support/random123.hpp"

namespace {

namespace dist = kindling::dist;
namespace kd = kindling::detail;
using kd::instruction_set;

// The vector paths this CPU runs (scalar excluded: it is the reference).
std::vector<instruction_set> vector_paths() {
  std::vector<instruction_set> out;
  for (instruction_set i : {instruction_set::avx2, instruction_set::avx512})
    if (kd::instruction_set_available(i)) out.push_back(i);
  return out;
}

template <class T>
bool same_bits(const T& a, const T& b) {
  return std::memcmp(&a, &b, sizeof(T)) == 0;
}

// First index where the vector path differs from the scalar one, or -1.
template <class C, class D>
long long first_difference(instruction_set isa, const D& d, const kindling::stream& s,
                           std::uint32_t domain, std::uint64_t first, std::size_t n) {
  const auto kernel = kd::prepare<C>(d);
  std::vector<C> scalar(n), vec(n);
  kd::generate_run_on(instruction_set::scalar, kernel, s, domain, first, n, scalar.data());
  kd::generate_run_on(isa, kernel, s, domain, first, n, vec.data());
  for (std::size_t i = 0; i < n; ++i)
    if (!same_bits(scalar[i], vec[i])) return static_cast<long long>(i);
  return -1;
}

template <class C, class D>
void check_paths(const D& d, const char* name) {
  const auto s = kindling::make_stream(2024, "pump.encoder.weight");
  // Offsets inside and across groups, a run crossing 2^32 blocks (the counter's high
  // word), and lengths that leave partial groups at both ends.
  const std::uint64_t firsts[] = {0, 1, 15, 16, 17, 63, 64, 65, 1000, 0xfffffffull * 16 - 40,
                                  (std::uint64_t{1} << 36) - 3};
  const std::size_t lengths[] = {1, 7, 64, 129, 1000, 4099};
  for (instruction_set isa : vector_paths()) {
    for (std::uint64_t first : firsts) {
      for (std::size_t n : lengths) {
        const long long at = first_difference<C>(isa, d, s, 0, first, n);
        CHECK_MESSAGE(at == -1, name << " on " << std::string(kd::instruction_set_name(isa)) << ", first "
                                     << first << ", n " << n
                                     << ": expected the scalar bits, differs at " << at);
      }
    }
  }
}

TEST_CASE("every vector path gives the scalar path's bits for every distribution") {
  MESSAGE("best instruction set here: "
          << std::string(kd::instruction_set_name(kd::best_instruction_set())));
  const double inf = std::numeric_limits<double>::infinity();
  SUBCASE("float") {
    check_paths<float>(dist::uniform{-0.3, 0.7}, "uniform");
    check_paths<float>(dist::uniform{1.0, 1.0000001}, "narrow uniform (x >= hi rounds)");
    check_paths<float>(dist::symmetric_uniform{0.0417}, "symmetric_uniform");
    check_paths<float>(dist::normal{0.25, 1.5}, "normal");
    check_paths<float>(dist::truncated_normal{0.0, 0.02, -2.0, 2.0}, "truncated [-2, 2]");
    check_paths<float>(dist::truncated_normal{1.0, 3.0, -inf, -1.0}, "truncated (-inf, -1]");
    check_paths<float>(dist::truncated_normal{0.0, 1.0, 4.0, inf}, "truncated [4, inf)");
    check_paths<float>(dist::truncated_normal{0.0, 1.0, -13.0, -11.0}, "truncated far tail");
    check_paths<float>(dist::truncated_normal{0.0, 1.0, -0.001, 0.001}, "truncated narrow");
  }
  SUBCASE("double") {
    check_paths<double>(dist::uniform{-0.3, 0.7}, "uniform");
    check_paths<double>(dist::symmetric_uniform{0.0417}, "symmetric_uniform");
    check_paths<double>(dist::normal{0.25, 1.5}, "normal");
    check_paths<double>(dist::truncated_normal{0.0, 0.02, -2.0, 2.0}, "truncated");
  }
}

TEST_CASE("the vector Philox gives Random123's philox4x32 blocks") {
  const auto s = kindling::make_stream(7, "valve.gain");
  const kindling::philox4x32_key key = s.philox_key();
  r123::Philox4x32 reference;
  const r123::Philox4x32::key_type rk = {{key[0], key[1]}};
  std::vector<instruction_set> paths = vector_paths();
  paths.push_back(instruction_set::scalar);
  for (instruction_set isa : paths) {
    for (std::uint64_t g : {std::uint64_t{0}, std::uint64_t{5}, (std::uint64_t{1} << 28) - 1,
                            std::uint64_t{1} << 28, std::uint64_t{0x123456789}}) {
      std::uint32_t w[64];
      kd::group_words(isa, key, 3, g, w);
      bool equal = true;
      for (unsigned lane = 0; lane < 16; ++lane) {
        const std::uint64_t b = 16 * g + lane;
        const r123::Philox4x32::ctr_type c = {
            {static_cast<std::uint32_t>(b), static_cast<std::uint32_t>(b >> 32), 3u, 1u}};
        const r123::Philox4x32::ctr_type x = reference(c, rk);
        for (unsigned j = 0; j < 4; ++j) equal = equal && w[16 * j + lane] == x.v[j];
      }
      CHECK_MESSAGE(equal, kd::instruction_set_name(isa) << ", group " << g
                                                         << ": expected Random123's words");
    }
  }
}

// Values that probe the rounding: near the bounds, signed zeros, infinities, NaN,
// float16 / bfloat16 ties and overflow.
std::vector<float> probe_values(const kindling::element_bounds& b) {
  std::vector<float> v = {0.0f, -0.0f, 1.0f, -1.0f, 0.5f, 65504.0f, 65520.0f, 1e-8f, -1e-8f,
                          std::numeric_limits<float>::infinity(),
                          -std::numeric_limits<float>::infinity(),
                          std::numeric_limits<float>::quiet_NaN(),
                          std::numeric_limits<float>::denorm_min(),
                          kd::float_from_bits(0x3f808000u), kd::float_from_bits(0x3f818000u)};
  for (double edge : {b.lo, b.hi}) {
    if (!std::isfinite(edge)) continue;
    float f = static_cast<float>(edge);
    for (int k = 0; k < 40; ++k) f = std::nextafter(f, -std::numeric_limits<float>::infinity());
    for (int k = 0; k < 80; ++k, f = std::nextafter(f, std::numeric_limits<float>::infinity()))
      v.push_back(f);
    // bfloat16 neighbours: steps of 2^16 in the bit pattern.
    for (int k = -40; k <= 40; ++k)
      v.push_back(kd::float_from_bits(kd::bits_of(static_cast<float>(edge)) +
                                      static_cast<std::uint32_t>(k * 0x8000)));
  }
  while (v.size() % 64 != 0) v.push_back(0.25f);
  return v;
}

const kindling::element_bounds bounds_cases[] = {
    {-0.3, 0.7, false, true},   {-0.0417, 0.0417, true, true}, kindling::unbounded,
    {-0.04, 0.04, false, false}, {0.0, 1.0, true, true},         {1.0, 1.0000001, false, true},
    {-1e300, 1e300, false, false}};

// The rounding as DEVELOPERS.md "Element types" defines it, written here without the
// rounder's thresholds: round to nearest even, then one step inside when the exact
// value is outside the bounds or on an open bound.
template <class E>
E defined_rounding(kindling::compute_type_t<E> c, const kindling::element_bounds& b) {
  using codec = kd::element_codec<E>;
  auto x = codec::round(c);
  const double t = codec::value(x);
  if (t > b.hi || (b.hi_open && t == b.hi)) {
    x = kd::step_down_bits(x, codec::sign);
  } else if (t < b.lo || (b.lo_open && t == b.lo)) {
    x = kd::step_up_bits(x, codec::sign);
  }
  return codec::make(x);
}

template <class E>
void check_rounder(const kindling::element_bounds& b, const std::vector<float>& values) {
  const kd::element_rounder<E> rounder(b);
  CHECK_MESSAGE(rounder.thresholds, "expected thresholds for bounds [" << b.lo << ", " << b.hi << "]");
  for (float x : values) {
    const auto c = static_cast<kindling::compute_type_t<E>>(x);
    const E expected = defined_rounding<E>(c, b);
    const E got = rounder(c);
    CHECK_MESSAGE(same_bits(expected, got), kindling::element_traits<E>::name << " of " << x
                                                 << " in [" << b.lo << ", " << b.hi
                                                 << "]: expected the defined rounding's bits");
  }
}

TEST_CASE("the threshold rounder gives the defined rounding, and the vector stores the rounder's bits") {
  for (const kindling::element_bounds& b : bounds_cases) {
    const std::vector<float> values = probe_values(b);
    check_rounder<float>(b, values);
    check_rounder<double>(b, values);
    check_rounder<kindling::float16>(b, values);
    check_rounder<kindling::bfloat16>(b, values);
    const kd::element_rounder<float> rf(b);
    for (instruction_set isa : vector_paths()) {
      for (bool stream : {false, true}) {
        alignas(64) float f32[1024];
        alignas(64) std::uint16_t b16[1024];
        const std::size_t n = values.size() < 1024 ? values.size() : 1024;
        const std::size_t nf = kd::round_store_f32(isa, values.data(), f32, n, rf.hi_max, rf.lo_min, stream);
        const std::size_t nb = kd::round_store_bf16(isa, values.data(), b16, n, rf.hi_max, rf.lo_min, stream);
        kd::store_fence();
        CHECK_MESSAGE(nf == n, "expected every vector of floats stored, got " << nf << " of " << n);
        CHECK_MESSAGE(nb == n, "expected every vector of bfloat16 stored, got " << nb << " of " << n);
        bool f_equal = true, b_equal = true;
        for (std::size_t k = 0; k < nf; ++k)
          f_equal = f_equal && same_bits(f32[k], kindling::element_traits<float>::from_compute(values[k], b));
        for (std::size_t k = 0; k < nb; ++k)
          b_equal = b_equal && b16[k] == kindling::element_traits<kindling::bfloat16>::from_compute(values[k], b).bits;
        CHECK_MESSAGE(f_equal, kd::instruction_set_name(isa) << " float stores in [" << b.lo << ", "
                                                             << b.hi << "]: expected from_compute's bits");
        CHECK_MESSAGE(b_equal, kd::instruction_set_name(isa) << " bfloat16 stores in [" << b.lo << ", "
                                                             << b.hi << "]: expected from_compute's bits");
      }
    }
  }
}

// The direct writers (lanes.hpp groups_f32_elements and groups_bf16_elements, fill's
// path for whole groups of float and bfloat16 elements) against generate +
// from_compute, at every alignment of the destination modulo a 64-byte line, with and
// without non-temporal stores; the guard elements on both sides must stay untouched.
template <class E, class Kernel>
bool direct_elements(instruction_set isa, const Kernel& kernel, const kindling::stream& s, std::uint64_t g0,
                     std::uint64_t groups, E* dst, float hi_max, float lo_min, bool streaming) {
  if constexpr (std::is_same<E, float>::value) {
    return kd::vector_elements(isa, kernel, s, 0, g0, groups, dst, hi_max, lo_min, streaming);
  } else {
    return kd::vector_elements(isa, kernel, s, 0, g0, groups, reinterpret_cast<std::uint16_t*>(dst), hi_max,
                               lo_min, streaming);
  }
}

template <class E, class D>
void check_direct_writer(const D& d, const char* name) {
  const auto s = kindling::make_stream(7, "pump.bearing.kernel");
  const auto kernel = kd::prepare<float>(d);
  const kd::element_rounder<E> rounder(dist::bounds_of(d));
  REQUIRE(rounder.thresholds);
  const std::uint64_t g0 = 5, groups = 3;
  const std::size_t n = static_cast<std::size_t>(groups * 64);
  std::vector<float> c(n);
  kd::generate_run_on(instruction_set::scalar, kernel, s, 0, g0 * 64, n, c.data());
  const E guard = kindling::element_traits<E>::from_compute(-1234.5f, kindling::unbounded);
  constexpr std::size_t per_line = 64 / sizeof(E);
  for (instruction_set isa : vector_paths()) {
    for (bool streaming : {false, true}) {
      for (std::size_t shift = 0; shift < per_line; ++shift) {
        std::vector<E> storage(n + 2 * per_line, guard);
        E* base = storage.data();
        while (reinterpret_cast<std::uintptr_t>(base) % 64 != 0) ++base;  // storage has a spare line
        E* const dst = base + shift;
        const std::size_t before = static_cast<std::size_t>(dst - storage.data());
        REQUIRE(before + n <= storage.size());
        if (!direct_elements(isa, kernel, s, g0, groups, dst, rounder.hi_max, rounder.lo_min, streaming))
          continue;  // this path has no direct writer; fill uses the buffer
        kd::store_fence();
        bool values = true, guards = true;
        for (std::size_t k = 0; k < n; ++k)
          values = values && same_bits(dst[k], kindling::element_traits<E>::from_compute(c[k], dist::bounds_of(d)));
        for (std::size_t k = 0; k < storage.size(); ++k)
          if (k < before || k >= before + n) guards = guards && same_bits(storage[k], guard);
        CHECK_MESSAGE(values, name << " (" << kindling::element_traits<E>::name << ") on "
                                   << kd::instruction_set_name(isa) << ", shift " << shift
                                   << (streaming ? ", streaming" : "") << ": expected from_compute's bits");
        CHECK_MESSAGE(guards, name << " (" << kindling::element_traits<E>::name << ") on "
                                   << kd::instruction_set_name(isa) << ", shift " << shift
                                   << (streaming ? ", streaming" : "") << ": expected nothing written outside");
      }
    }
  }
}

TEST_CASE("the direct element writers give from_compute's bits at every alignment, nothing outside") {
  check_direct_writer<float>(dist::uniform{1.0, 1.0000001}, "narrow uniform (values step inside)");
  check_direct_writer<float>(dist::symmetric_uniform{0.1}, "symmetric_uniform");
  check_direct_writer<float>(dist::normal{0.25, 1.5}, "normal");
  check_direct_writer<float>(dist::truncated_normal{0.0, 1.0, 4.0, 4.001}, "narrow far truncated normal");
  check_direct_writer<kindling::bfloat16>(dist::uniform{1.0, 1.01}, "narrow uniform (values step inside)");
  check_direct_writer<kindling::bfloat16>(dist::symmetric_uniform{0.1}, "symmetric_uniform");
  check_direct_writer<kindling::bfloat16>(dist::normal{0.25, 1.5}, "normal");
  check_direct_writer<kindling::bfloat16>(dist::truncated_normal{0.0, 1.0, 4.0, 4.1}, "narrow far truncated normal");
}

// fill() element by element from dist::generate and from_compute: the definition the
// fast path (prepared kernel, contiguous stores, streaming) must reproduce.
template <class E, class D>
void check_fill(const D& d, const kindling::shape& global, const kindling::region& part,
                const char* name, kindling::storage_order order = kindling::storage_order::row_major) {
  const auto s = kindling::make_stream(99, "compressor.head");
  std::uint64_t size = 1;
  for (std::uint64_t e : part.extent()) size *= e;
  std::vector<E> dense(size);
  const kindling::strided_view<E> v(dense.data(), global, part, order);
  kindling::fill(v, d, s);
  // Read back in local row-major order.
  std::vector<E> got(size);
  {
    std::vector<std::uint64_t> at(global.rank(), 0);
    for (std::uint64_t k = 0; k < size; ++k) {
      std::int64_t offset = 0;
      for (std::size_t dim = 0; dim < global.rank(); ++dim)
        offset += static_cast<std::int64_t>(at[dim]) * v.stride(dim);
      got[k] = dense[static_cast<std::size_t>(offset)];
      for (std::size_t dim = global.rank(); dim-- > 0;) {
        if (++at[dim] < part.extent()[dim]) break;
        at[dim] = 0;
      }
    }
  }
  using C = kindling::compute_type_t<E>;
  // Global row-major index of each local element, then the reference value.
  const std::size_t rank = global.rank();
  std::vector<std::uint64_t> index(rank, 0);
  bool equal = true;
  std::uint64_t first_bad = size;
  for (std::uint64_t k = 0; k < size; ++k) {
    std::uint64_t g = 0;
    for (std::size_t dim = 0; dim < rank; ++dim) g = g * global[dim] + part.offset()[dim] + index[dim];
    C c;
    dist::generate(d, s, kindling::domain::values, g, 1, &c);
    const E expected = kindling::element_traits<E>::from_compute(c, dist::bounds_of(d));
    if (!same_bits(expected, got[static_cast<std::size_t>(k)]) && equal) {
      equal = false;
      first_bad = k;
    }
    for (std::size_t dim = rank; dim-- > 0;) {
      if (++index[dim] < part.extent()[dim]) break;
      index[dim] = 0;
    }
  }
  CHECK_MESSAGE(equal, name << " (" << kindling::element_traits<E>::name
                            << "): expected generate + from_compute, first differs at " << first_bad);
}

TEST_CASE("fill's fast paths give the values of generate and from_compute") {
  const kindling::shape whole(37, 129);
  const kindling::region inner(kindling::shape(3, 5), kindling::shape(30, 100));
  SUBCASE("whole and partial regions, every element type") {
    check_fill<float>(dist::symmetric_uniform{0.2}, whole, kindling::region::whole(whole), "symmetric whole");
    check_fill<float>(dist::uniform{-0.3, 0.7}, whole, inner, "uniform inner");
    check_fill<kindling::bfloat16>(dist::normal{0.0, 0.05}, whole, inner, "normal inner");
    check_fill<kindling::bfloat16>(dist::symmetric_uniform{0.2}, whole, kindling::region::whole(whole), "symmetric whole");
    check_fill<kindling::float16>(dist::truncated_normal{0.0, 1.0, -2.0, 2.0}, whole, inner, "truncated inner");
    check_fill<double>(dist::normal{1.0, 2.0}, whole, inner, "normal inner");
    check_fill<float>(dist::normal{0.0, 0.05}, whole, inner, "normal inner, column-major",
                      kindling::storage_order::column_major);
  }
  SUBCASE("a fill large enough to stream past the cache") {
    const kindling::shape big(1100, 4000);  // 4.4 M floats = 17.6 MB >= fill_streaming_bytes
    static_assert(1100u * 4000u * sizeof(float) >= kindling::fill_streaming_bytes, "streams");
    check_fill<float>(dist::normal{0.0, 0.01}, big, kindling::region::whole(big), "normal streaming");
    check_fill<float>(dist::symmetric_uniform{0.03}, big,
                      kindling::region(kindling::shape(1, 3), kindling::shape(1099, 3990)),
                      "symmetric streaming, rows cut at odd columns");
  }
}

}  // namespace
