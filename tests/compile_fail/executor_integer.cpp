// first error: the executor must be callable as exec\(n_tasks, task\); for 4 threads pass kindling::thread_executor\(4\)
// A thread count passed where the executor goes.
#include <vector>

#include "kindling/schemes/fan_scaled.hpp"

int main() {
  std::vector<float> w(6);
  kindling::initialize(kindling::strided_view<float>(w.data(), kindling::shape(2, 3)), kindling::dense(3, 2),
                       kindling::glorot_uniform{}, kindling::make_stream(1, "w"), 4);
}
