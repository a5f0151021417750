// Packaging test: a program that uses only the core, built against an installed
// kindling (find_package, pkg-config) or an embedded one (add_subdirectory).
#include <kindling/kindling.hpp>

#include <cstdio>
#include <vector>

int main() {
  std::vector<float> w(8 * 4);
  kindling::initialize(kindling::strided_view<float>(w.data(), kindling::shape(8, 4)), kindling::dense(4, 8),
                       kindling::glorot_uniform{}, kindling::make_stream(1, "consumer.w"));
  const float bound = 0.70710678f;  // sqrt(6 / (4 + 8))
  for (float x : w) {
    if (!(x > -bound && x < bound)) return 1;
  }
  std::printf("consumer: %zu weights inside the Glorot bound\n", w.size());
  return 0;
}
