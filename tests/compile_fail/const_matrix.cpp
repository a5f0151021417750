// first error: the target has const elements \(a const matrix or a strided_view<const T>\) and cannot be written
// A const Eigen matrix given to initialize().
#include "kindling/eigen.hpp"
#include "kindling/schemes/fan_scaled.hpp"

int main() {
  const Eigen::MatrixXf w = Eigen::MatrixXf::Zero(2, 3);
  kindling::initialize(w, kindling::dense(3, 2), kindling::he_normal{}, kindling::make_stream(1, "w"));
}
