// first error: the target has const elements \(a const matrix or a strided_view<const T>\) and cannot be written
// A view of const elements given to fill().
#include <vector>

#include "kindling/fill.hpp"

int main() {
  const std::vector<double> w(6);
  kindling::fill(kindling::strided_view<const double>(w.data(), kindling::shape(6)), kindling::dist::normal{0.0, 1.0},
                 kindling::make_stream(1, "w"));
}
