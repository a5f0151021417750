// bench/compile_times.py, "core": one tensor initialized through the umbrella header.
#include <kindling/kindling.hpp>

#include <vector>

int main() {
  using namespace kindling;
  std::vector<float> w(256 * 128);
  initialize(strided_view<float>(w.data(), shape(256, 128)), dense(128, 256), he_normal{},
             make_stream(42, "heat_exchanger.inlet.weight"));
  return w[3] > 100.0f ? 1 : 0;
}
