// Tests of audit/symmetry.hpp: planted duplicates and near-duplicates are found with
// their indices; zero, constant and flat units fail; two seeds are independent.
// Every tensor comes from a fixed seed, so the verdicts are deterministic.
#include "kindling/audit/symmetry.hpp"

#include <doctest/doctest.h>

#include <algorithm>
#include <cmath>
#include <vector>

#include "../support/errors.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {

std::vector<double> random_units(std::uint64_t rows, std::uint64_t cols, std::uint64_t seed) {
  std::vector<double> w(rows * cols);
  fill(strided_view<double>(w.data(), shape(rows, cols)), dist::normal{0, 1}, make_stream(seed, "pump.sensor"));
  return w;
}

void copy_unit(std::vector<double>& w, std::uint64_t cols, std::uint64_t from, std::uint64_t to) {
  for (std::uint64_t j = 0; j < cols; ++j) w[to * cols + j] = w[from * cols + j];
}

// Makes unit `to` a unit at exactly cosine c to unit `from`, using unit `noise`'s
// direction orthogonalized against `from`.
void near_copy(std::vector<double>& w, std::uint64_t cols, std::uint64_t from, std::uint64_t noise,
               std::uint64_t to, double c) {
  double uu = 0, un = 0;
  for (std::uint64_t j = 0; j < cols; ++j) {
    uu += w[from * cols + j] * w[from * cols + j];
    un += w[from * cols + j] * w[noise * cols + j];
  }
  std::vector<double> n(cols);
  double nn = 0;
  for (std::uint64_t j = 0; j < cols; ++j) {
    n[j] = w[noise * cols + j] - un / uu * w[from * cols + j];
    nn += n[j] * n[j];
  }
  const double t = std::tan(std::acos(c)) * std::sqrt(uu / nn);
  for (std::uint64_t j = 0; j < cols; ++j) w[to * cols + j] = w[from * cols + j] + t * n[j];
}

}  // namespace

TEST_CASE("independent random units pass every symmetry check") {
  const auto w = random_units(64, 256, 1);
  const audit_report r = check_symmetry(strided_view<const double>(w.data(), shape(64, 256)));
  CHECK_MESSAGE(r, r.explain());
  CHECK(r.findings().size() == 6);
}

TEST_CASE("duplicated units planted at random places are found with their indices") {
  auto w = random_units(200, 50, 2);
  // Places drawn once from a seeded stream, written out so the test reads plainly.
  copy_unit(w, 50, 13, 171);
  copy_unit(w, 50, 13, 88);
  copy_unit(w, 50, 140, 7);
  const strided_view<const double> v(w.data(), shape(200, 50));
  const auto groups = duplicate_units(v);
  REQUIRE(groups.size() == 2);
  CHECK(groups[0] == std::vector<std::uint64_t>{7, 140});
  CHECK(groups[1] == std::vector<std::uint64_t>{13, 88, 171});
  const audit_report r = check_symmetry(v);
  CHECK_FALSE(r);
  CHECK_MESSAGE(mentions(r.find("duplicate-units")->sentence, "units 7, 140 are exact duplicates (2 group(s), 5 units in all; 4 equal pair(s)"),
                r.explain());
  SUBCASE("-0 and +0 are the same weight") {
    w[7 * 50] = 0.0;
    w[140 * 50] = -0.0;
    CHECK(duplicate_units(v).size() == 2);
  }
  SUBCASE("units along the last axis of an [in, out] layout") {
    std::vector<double> t(50 * 200);
    for (std::uint64_t o = 0; o < 200; ++o)
      for (std::uint64_t i = 0; i < 50; ++i) t[i * 200 + o] = w[o * 50 + i];
    const auto g2 = duplicate_units(strided_view<const double>(t.data(), shape(50, 200)), weight_layout::in_out);
    CHECK(g2 == groups);
  }
}

TEST_CASE("near-duplicates at cosine 0.999 are found by the Gram matrix and by the projection filter") {
  auto w = random_units(300, 64, 3);
  near_copy(w, 64, 21, 22, 250, 0.999);
  const strided_view<const double> v(w.data(), shape(300, 64));
  symmetry_options exact;
  symmetry_options filtered;
  filtered.gram_limit = 0;  // force the random-projection path
  for (const symmetry_options& o : {exact, filtered}) {
    const auto pairs = near_duplicate_units(v, o);
    REQUIRE(pairs.size() == 1);
    CHECK(pairs[0].first == 21);
    CHECK(pairs[0].second == 250);
    CHECK(pairs[0].cosine == doctest::Approx(0.999).epsilon(1e-9));
    const audit_report r = check_symmetry(v, o);
    CHECK_MESSAGE(mentions(r.find("near-duplicate-units")->sentence, "units 21 and 250 have cosine similarity 0.999"),
                  r.explain());
  }
  SUBCASE("a pair at cosine 0.95 stays below the default 0.99") {
    near_copy(w, 64, 21, 22, 250, 0.95);
    CHECK(near_duplicate_units(v).empty());
  }
}

TEST_CASE("the projection filter finds many planted pairs among many units") {
  // 2000 units of 128 connections, 20 pairs at cosine 0.995: each is missed with
  // probability about 1e-3 (8 bands of 16 sign bits), so all 20 are found except with
  // probability about 0.02 over random seeds; this seed finds them all.
  auto w = random_units(2000, 128, 4);
  for (std::uint64_t k = 0; k < 20; ++k) near_copy(w, 128, 100 * k, 100 * k + 1, 100 * k + 50, 0.995);
  symmetry_options filtered;
  filtered.gram_limit = 0;
  const auto pairs = near_duplicate_units(strided_view<const double>(w.data(), shape(2000, 128)), filtered);
  CHECK(pairs.size() == 20);
}

TEST_CASE("zero, constant and flat-unit tensors fail with their own sentences") {
  std::vector<float> w(32 * 16, 0.0f);
  const strided_view<const float> v(w.data(), shape(32, 16));
  SUBCASE("zero") {
    const audit_report r = check_symmetry(v);
    CHECK_FALSE(r);
    CHECK_MESSAGE(mentions(r.explain(), "all 512 values are zero"), r.explain());
  }
  SUBCASE("constant") {
    std::fill(w.begin(), w.end(), 0.25f);
    const audit_report r = check_symmetry(v);
    CHECK_FALSE(r.find("constant")->passed);
    CHECK_MESSAGE(mentions(r.explain(), "every value is 0.25"), r.explain());
  }
  SUBCASE("a unit whose incoming weights are all equal") {
    fill(strided_view<float>(w.data(), shape(32, 16)), dist::normal{0, 1}, make_stream(9, "f"));
    for (int j = 0; j < 16; ++j) w[5 * 16 + static_cast<std::size_t>(j)] = 0.5f;
    const audit_report r = check_symmetry(v);
    CHECK_FALSE(r.find("zero-variance-units")->passed);
    CHECK_MESSAGE(mentions(r.explain(), "units 5"), r.explain());
  }
  SUBCASE("NaN is reported, not compared") {
    w[3] = std::nanf("");
    CHECK_MESSAGE(mentions(check_symmetry(v).explain(), "1 NaN"), check_symmetry(v).explain());
  }
}

TEST_CASE("two seeds give independent tensors and a shared stream does not") {
  // False-alarm rate of the independent pair at alpha = 0.001: 0.001 over random seeds.
  const auto a = random_units(100, 100, 10), b = random_units(100, 100, 11);
  const strided_view<const double> va(a.data(), shape(100, 100)), vb(b.data(), shape(100, 100));
  CHECK_MESSAGE(check_independent(va, vb), check_independent(va, vb).explain());
  std::vector<double> c(a);
  for (std::size_t i = 0; i < c.size(); ++i) c[i] = 0.1 * a[i] + b[i];  // r ≈ 0.1, z ≈ 10
  const audit_report r = check_independent(va, strided_view<const double>(c.data(), shape(100, 100)));
  CHECK_FALSE(r);
  CHECK_MESSAGE(mentions(r.explain(), "the two tensors are correlated: r = "), r.explain());
  // r = 0.1 / sqrt(1.01) = 0.0995 in expectation, standard error 0.01: within 4 of them.
  CHECK(std::tanh(r.find("correlation")->statistic / std::sqrt(9997.0)) == doctest::Approx(0.0995).epsilon(0.4));
  CHECK(mentions(message_of<std::invalid_argument>([&] {
                   (void)check_independent(va, strided_view<const double>(c.data(), shape(10, 100)));
                 }),
                 "argument 'b' has 1000 elements; expected as many as 'a' (10000)"));
}

TEST_CASE("bad input to the symmetry checks names the argument") {
  std::vector<float> w(64, 1.0f);
  const strided_view<const float> v(w.data(), shape(8, 8));
  symmetry_options o;
  o.near_cosine = 1.5;
  CHECK(mentions(message_of<std::domain_error>([&] { (void)check_symmetry(v, o); }), "'near_cosine' = 1.5"));
  const strided_view<const float> part = v.sub(region(shape(0, 0), shape(4, 8)));
  CHECK(mentions(message_of<std::invalid_argument>([&] { (void)check_symmetry(part); }), "holds only a region"));
}

TEST_CASE("the chance cosine tail matches scipy.special.betainc") {
  // P(cos >= c) = betainc((n - 1)/2, 1/2, 1 - c²) / 2, values from scipy 1.x
  // (/usr/bin/python3, this machine); the formula: Cai, Fan & Jiang, JMLR 2013.
  struct row { std::uint64_t n; double c, p; };
  for (const row& x : {row{3, 0.99, 0.005000000000000005}, row{2, 0.99, 0.045053413644412135},
                       row{10, 0.99, 2.8850580685194326e-09}, row{64, 0.5, 1.1137602195959368e-05},
                       row{4096, 0.1, 7.045180119102627e-11}, row{16, 0.995, 9.986151870166334e-17},
                       row{5, 0.3, 0.2817499999999998}}) {
    CHECK_MESSAGE(detail::chance_cosine_tail(x.n, x.c) == doctest::Approx(x.p).epsilon(1e-9), "n = ", x.n, ", c = ", x.c);
  }
  // ln B(a, 1/2) on both sides of the switch to Stirling's series: scipy.special.betaln.
  CHECK(detail::log_beta_half(1e4) == doctest::Approx(-4.0327927430626005).epsilon(1e-12));
  CHECK(detail::log_beta_half(2e4) == doctest::Approx(-4.379372583323857).epsilon(1e-11));
}

namespace {

// Units of a correct draw: He normal or Glorot uniform of the given shape, element E.
template <class E>
std::vector<E> drawn(std::uint64_t rows, std::uint64_t cols, std::uint64_t seed, bool uniform) {
  std::vector<E> w(rows * cols);
  const strided_view<E> v(w.data(), shape(rows, cols));
  const stream s = make_stream(seed, "conveyor.belt");
  if (uniform) {
    fill(v, dist::uniform{-1, 1}, s);
  } else {
    fill(v, dist::normal{0, 1}, s);
  }
  return w;
}

// x rounded to nearest even in E.
template <class E>
E element_of(double x) {
  if constexpr (std::is_same_v<E, float16>) {
    return round_to_float16(static_cast<float>(x));
  } else if constexpr (std::is_same_v<E, bfloat16>) {
    return round_to_bfloat16(static_cast<float>(x));
  } else {
    return static_cast<E>(x);
  }
}

// Failures of check_symmetry over `seeds` correct draws.
template <class E>
int false_alarms(std::uint64_t rows, std::uint64_t cols, int seeds, bool uniform) {
  int failed = 0;
  for (int seed = 0; seed < seeds; ++seed) {
    const auto w = drawn<E>(rows, cols, static_cast<std::uint64_t>(seed) + 1000, uniform);
    const audit_report r = check_symmetry(strided_view<const E>(w.data(), shape(rows, cols)));
    if (!r) {
      ++failed;
      MESSAGE(r.explain());
    }
  }
  return failed;
}

}  // namespace

TEST_CASE_TEMPLATE("size: correct draws pass at about the nominal rate, few connections included", E, float, double,
                   float16, bfloat16) {
  // alpha = 1e-3 per tensor and check (3 statistical checks), so over the 800 small
  // draws (normal and uniform) and 6 large ones about 2.4 false alarms at most are
  // expected; measured: f32 1, f64 0, f16 0, bf16 1 (of 806 each). Allow 4: a rate of a
  // few times alpha would show.
  int failed = 0, runs = 0;
  for (const auto& sz : {std::pair<std::uint64_t, std::uint64_t>{40, 3}, {100, 2}, {200, 8}, {30, 1}}) {
    failed += false_alarms<E>(sz.first, sz.second, 100, false) + false_alarms<E>(sz.first, sz.second, 100, true);
    runs += 200;
  }
  for (const auto& sz : {std::pair<std::uint64_t, std::uint64_t>{65536, 3}, {30000, 1}, {3, 65536}}) {
    failed += false_alarms<E>(sz.first, sz.second, 2, false);
    runs += 2;
  }
  MESSAGE("false alarms: ", failed, " of ", runs);
  CHECK(failed <= 4);
}

TEST_CASE("power: a copied unit plus tiny noise is caught among many units of few connections") {
  // float 65536 x 3: chance cosines reach 1 - 9e-13 at alpha 1e-3, so a copy with
  // relative noise 1e-8 (1 - cos ≈ 1e-16) is improbable and must be flagged; the
  // duplicate check flags the exact copy (q³ λ ≈ 1e-11 chance pairs).
  auto w = drawn<float>(65536, 3, 7, false);
  const strided_view<const float> v(w.data(), shape(65536, 3));
  CHECK_MESSAGE(check_symmetry(v), check_symmetry(v).explain());
  for (std::size_t j = 0; j < 3; ++j) w[40000 * 3 + j] = w[123 * 3 + j] * (1 + 1e-7f * static_cast<float>(j + 1));
  const audit_report near = check_symmetry(v);
  CHECK_FALSE(near.find("near-duplicate-units")->passed);
  CHECK_MESSAGE(mentions(near.explain(), "units 123 and 40000"), near.explain());
  for (std::size_t j = 0; j < 3; ++j) w[40000 * 3 + j] = w[123 * 3 + j];
  const audit_report same = check_symmetry(v);
  CHECK_FALSE(same.find("duplicate-units")->passed);
  CHECK(same.find("near-duplicate-units")->passed);
}

TEST_CASE_TEMPLATE("power: a near copy at cosine 0.999 among 4000 units of 128 connections", E, float, double, float16,
                   bfloat16) {
  // The projection path (4000² x 128 > 2^28); each planted pair is missed with probability
  // <= 1e-3 by design, so finding all 10 fails with probability about 0.01 over seeds.
  auto d = random_units(4000, 128, 21);
  for (std::uint64_t k = 0; k < 10; ++k) near_copy(d, 128, 300 * k, 300 * k + 1, 300 * k + 7, 0.999);
  std::vector<E> w(d.size());
  for (std::size_t i = 0; i < d.size(); ++i) w[i] = element_of<E>(d[i]);
  const strided_view<const E> v(w.data(), shape(4000, 128));
  const auto pairs = near_duplicate_units(v);
  CHECK(pairs.size() == 10);
  const audit_report r = check_symmetry(v);
  CHECK_FALSE(r.find("near-duplicate-units")->passed);
  CHECK(r.find("duplicate-units")->passed);
}

TEST_CASE("few connections: 1-connection units and coarse types are not judged by cosine") {
  const auto w = drawn<bfloat16>(65536, 3, 3, false);
  const audit_report r = check_symmetry(strided_view<const bfloat16>(w.data(), shape(65536, 3)));
  CHECK_MESSAGE(mentions(r.find("near-duplicate-units")->sentence, "not applicable"), r.explain());
  const auto one = drawn<float>(30000, 1, 3, false);
  const audit_report r1 = check_symmetry(strided_view<const float>(one.data(), shape(30000, 1)));
  CHECK_MESSAGE(mentions(r1.find("near-duplicate-units")->sentence, "units of 1 connection"), r1.explain());
  // 30000 float values: about C(30000, 2) q chance-equal pairs, many; not decided.
  CHECK_MESSAGE(r1.find("duplicate-units")->passed, r1.explain());
}

#if defined(KINDLING_LANES_X86)
TEST_CASE_TEMPLATE("the units' pass gives the same bits in its AVX2 form as in its generic form", E, float, bfloat16) {
  // The pass is taken in its AVX2 form on CPUs that have it; the verdict must not depend
  // on the CPU. 70 units of 1000 connections: whole sketch blocks and a remainder.
  if (!detail::instruction_set_available(detail::instruction_set::avx2)) return;
  std::vector<E> w(70 * 1000);
  fill(strided_view<E>(w.data(), shape(70, 1000)), dist::normal{0, 0.05}, make_stream(9, "conveyor.belt.weight"));
  for (std::size_t j = 0; j < 1000; ++j) w[5 * 1000 + j] = w[5 * 1000];  // one flat unit
  const detail::unit_reader<const E> reader(strided_view<const E>(w.data(), shape(70, 1000)), weight_layout::out_in);
  detail::unit_summary generic, wide;
  for (detail::unit_summary* s : {&generic, &wide}) {
    s->rows = reader.rows(), s->cols = reader.cols(), s->width = std::min(s->cols, detail::sketch_width);
    s->sketch.assign(static_cast<std::size_t>(s->rows * s->width), 0.0f);
    s->sketch_norm.assign(static_cast<std::size_t>(s->rows), 0.0f);
  }
  detail::summarize_unit_rows(reader, generic);
  detail::summarize_unit_rows_avx2(reader, wide);
  CHECK(generic.sketch == wide.sketch);
  CHECK(generic.sketch_norm == wide.sketch_norm);
  CHECK(generic.flat_units == wide.flat_units);
  CHECK(generic.flat_units == std::vector<std::uint64_t>{5});
}
#endif

TEST_CASE("bfloat16 units read in place give the same summary as their float values") {
  // A contiguous bfloat16 unit is summarized straight from its stored halves; a unit
  // spread over memory (column-major storage) through a float buffer; both must give the
  // bits of the same values stored as float (the sketch sums each value in the same
  // order, and a bfloat16 is exactly a float).
  constexpr std::uint64_t rows = 70, cols = 1000;
  std::vector<bfloat16> packed(rows * cols), columns(rows * cols);
  fill(strided_view<bfloat16>(packed.data(), shape(rows, cols)), dist::normal{0, 0.05},
       make_stream(11, "heat.exchanger.weight"));
  for (std::uint64_t j = 0; j < cols; ++j) packed[9 * cols + j] = packed[9 * cols];  // one flat unit
  std::vector<float> as_float(rows * cols);
  for (std::uint64_t r = 0; r < rows; ++r) {
    for (std::uint64_t j = 0; j < cols; ++j) {
      columns[j * rows + r] = packed[r * cols + j];
      as_float[r * cols + j] = to_float(packed[r * cols + j]);
    }
  }
  const auto summary = [](const auto& reader) {
    detail::unit_summary s;
    s.rows = reader.rows(), s.cols = reader.cols(), s.width = std::min(s.cols, detail::sketch_width);
    s.sketch.assign(static_cast<std::size_t>(s.rows * s.width), 0.0f);
    s.sketch_norm.assign(static_cast<std::size_t>(s.rows), 0.0f);
    detail::summarize_unit_rows(reader, s);
    return s;
  };
  const detail::unit_reader<const bfloat16> in_place(strided_view<const bfloat16>(packed.data(), shape(rows, cols)),
                                                      weight_layout::out_in);
  const detail::unit_reader<const bfloat16> buffered(
      strided_view<const bfloat16>(columns.data(), shape(rows, cols), storage_order::column_major),
      weight_layout::out_in);
  const detail::unit_reader<const float> reference(strided_view<const float>(as_float.data(), shape(rows, cols)),
                                                   weight_layout::out_in);
  REQUIRE(in_place.contiguous_unit(0) != nullptr);
  REQUIRE(buffered.contiguous_unit(0) == nullptr);
  const detail::unit_summary a = summary(in_place), b = summary(buffered), f = summary(reference);
  CHECK(a.sketch == f.sketch);
  CHECK(b.sketch == f.sketch);
  CHECK(a.sketch_norm == f.sketch_norm);
  CHECK(b.sketch_norm == f.sketch_norm);
  CHECK(a.flat_units == std::vector<std::uint64_t>{9});
  CHECK(b.flat_units == a.flat_units);
  CHECK(f.flat_units == a.flat_units);
  // The sketch itself, summed here as its definition says: value t of unit r is the sum
  // over j = t, t + 64, ... of sign(j) w[r, j], in float, in that order.
  for (const std::uint64_t r : {std::uint64_t{0}, std::uint64_t{9}, rows - 1}) {
    for (std::uint64_t t = 0; t < detail::sketch_width; ++t) {
      float acc = 0;
      for (std::uint64_t j = t; j < cols; j += detail::sketch_width) {
        acc += detail::sign_of_connection<float>(j) * as_float[r * cols + j];
      }
      CHECK(a.sketch[r * detail::sketch_width + t] == acc);
    }
  }
}

TEST_CASE("the units keyed by hash sort as std::sort sorts their words") {
  // keyed_units sorts by radix; the order must be std::sort's, on keys that differ in
  // every byte and on keys that share whole bytes (whose passes are skipped).
  for (const std::uint64_t keep : {~std::uint64_t{0}, std::uint64_t{0x00FF00000000FF00u}, std::uint64_t{0}}) {
    CAPTURE(keep);
    const std::uint64_t units = 5000;
    detail::keyed_units entries(units);
    std::vector<std::uint64_t> words;
    for (std::uint64_t u = 0; u < units; ++u) {
      const std::uint64_t hash = detail::mix64(u % 1700 + 1) & keep;  // runs of equal hashes
      entries.add(hash, u);
      words.push_back((hash & ~std::uint64_t{8191}) | u);  // 13 unit bits for 5000 units
    }
    entries.sort();
    std::sort(words.begin(), words.end());
    REQUIRE(entries.size() == words.size());
    for (std::size_t i = 0; i < words.size(); ++i) REQUIRE(entries.unit(i) == (words[i] & 8191u));
  }
}

TEST_CASE("keyed_units sorts an empty list and a list of one") {
  detail::keyed_units entries(1);
  entries.sort();
  CHECK(entries.size() == 0);
  entries.add(0x1234567800000000u, 0);
  entries.sort();
  REQUIRE(entries.size() == 1);
  CHECK(entries.unit(0) == 0);
}

TEST_CASE("a band key's sign word is the chain of shifts it replaced") {
  // sign_word ORs each sign into its place; the definition is a left shift per dot, the
  // first dot ending in the highest of len bits.
  std::vector<float> dots(64);
  for (std::size_t k = 0; k < dots.size(); ++k) dots[k] = static_cast<float>(detail::mix64(k + 11) % 7) - 3.0f;
  dots[5] = 0.0f, dots[6] = -0.0f;  // zero is not > 0
  for (const std::uint64_t len : {std::uint64_t{1}, std::uint64_t{16}, std::uint64_t{48}, std::uint64_t{64}}) {
    CAPTURE(len);
    std::uint64_t chain = 0;
    for (std::uint64_t k = 0; k < len; ++k) chain = (chain << 1) | (dots[k] > 0 ? 1u : 0u);
    CHECK(detail::sign_word(dots.data(), len) == chain);
  }
}

TEST_CASE("units with equal sketches hash alike, -0 and +0 included; others apart") {
  detail::unit_summary s;
  s.rows = 4, s.cols = 100, s.width = detail::sketch_width;
  s.sketch.assign(s.rows * s.width, 0.0f);
  for (std::uint64_t t = 0; t < s.width; ++t) {
    s.sketch[t] = s.sketch[s.width + t] = static_cast<float>(t) - 20.0f;
    s.sketch[2 * s.width + t] = static_cast<float>(t) - 20.0f;
  }
  s.sketch[s.width + 20] = -0.0f;       // unit 1: unit 0 with -0 where unit 0 has +0
  s.sketch[2 * s.width + 63] += 1.0f;  // unit 2: unit 0 but its last value
  CHECK(detail::sketch_hash(s, 0) == detail::sketch_hash(s, 1));
  CHECK(detail::sketch_hash(s, 0) != detail::sketch_hash(s, 2));
  CHECK(detail::sketch_hash(s, 0) != detail::sketch_hash(s, 3));
}

TEST_CASE_TEMPLATE("16-bit units' equal-value rates, counted by bit pattern, are the bits of the sorted count", E, bfloat16,
                   float16) {
  // equal_value_rates counts float16 and bfloat16 values by bit pattern instead of sorting
  // them; its sums must be the bits of the sort over the same values stored as float
  // (flat units, a negative zero and coarse draws give many equal values).
  for (const std::uint64_t cols : {std::uint64_t{3}, std::uint64_t{8}, std::uint64_t{300}}) {
    CAPTURE(cols);
    const std::uint64_t rows = 2000;
    std::vector<E> h(rows * cols);
    fill(strided_view<E>(h.data(), shape(rows, cols)), dist::normal{0, 0.01}, make_stream(5, "belt.roller.weight"));
    for (std::uint64_t j = 0; j < cols; ++j) h[3 * cols + j] = h[3 * cols];
    h[7] = E{0x8000};  // -0, the same weight as +0
    h[8] = E{0x0000};
    std::vector<float> f(h.size());
    for (std::size_t k = 0; k < h.size(); ++k) f[k] = to_float(h[k]);
    const detail::equal_rates a = detail::equal_value_rates(
        detail::unit_reader<const E>(strided_view<const E>(h.data(), shape(rows, cols)), weight_layout::out_in));
    const detail::equal_rates b = detail::equal_value_rates(
        detail::unit_reader<const float>(strided_view<const float>(f.data(), shape(rows, cols)), weight_layout::out_in));
    CHECK(a.pair > 0.0);
    CHECK(a.pair == b.pair);
    CHECK(a.unit == b.unit);
    CHECK(a.pair_unit == b.pair_unit);
  }
}
