// first error: the executor must be callable as exec\(n_tasks, task\); for 4 threads pass kindling::thread_executor\(4\)
// A thread count passed where the executor goes, to fill() of an Eigen matrix.
#include "kindling/eigen.hpp"

int main() {
  Eigen::MatrixXf w(2, 3);
  kindling::fill(w, kindling::dist::normal{0.0, 1.0}, kindling::make_stream(1, "w"), kindling::domain::values, 4);
}
