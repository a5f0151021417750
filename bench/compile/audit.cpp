// bench/compile_times.py, "core + audits": the tensor of core.cpp, then its audits, as a
// framework's unit test would write them.
#include <kindling/audit/conformance.hpp>
#include <kindling/audit/symmetry.hpp>
#include <kindling/kindling.hpp>

#include <vector>

int main() {
  using namespace kindling;
  std::vector<float> w(256 * 128);
  const strided_view<float> v(w.data(), shape(256, 128));
  initialize(v, dense(128, 256), he_normal{}, make_stream(42, "heat_exchanger.inlet.weight"));
  const strided_view<const float> r(w.data(), shape(256, 128));
  const bool ok = check_scheme(r, dense(128, 256), he_normal{}).passed() && check_symmetry(r).passed();
  return ok ? 0 : 1;
}
