// Packaging test: a framework's unit test as a user writes it -- a weight initialized,
// then audited (check_scheme, check_symmetry) in every element type -- built header-only
// and in the compiled mode, where the audits' passes come from the installed library.
// Both builds must print the same verdicts (run.sh compares them).
#include <kindling/audit/conformance.hpp>
#include <kindling/audit/symmetry.hpp>
#include <kindling/kindling.hpp>

#include <cstdio>
#include <vector>

namespace {
template <class E>
bool audited(const char* type) {
  using namespace kindling;
  std::vector<E> w(96 * 64);
  const strided_view<E> v(w.data(), shape(96, 64));
  initialize(v, dense(64, 96), he_normal{}, make_stream(3, "conveyor.belt.weight"));
  const strided_view<const E> r(w.data(), shape(96, 64));
  const bool right = check_scheme(r, dense(64, 96), he_normal{}).passed() && check_symmetry(r).passed() &&
                     check_symmetry(v).passed();
  const bool wrong = check_scheme(v, dense(64, 96), he_normal{2.0}).passed();  // 4x the variance: caught
  std::printf("%s: declared scheme %s, a gain of 2 %s\n", type, right ? "passes" : "FAILS",
              wrong ? "PASSES" : "is caught");
  return right && !wrong;
}
}  // namespace

int main() {
  const bool ok = audited<float>("f32") & audited<double>("f64") & audited<kindling::float16>("f16") &
                  audited<kindling::bfloat16>("bf16");
  return ok ? 0 : 1;
}
