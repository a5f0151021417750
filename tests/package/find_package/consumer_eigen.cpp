// Packaging test: the Eigen component (kindling::eigen) from an installed prefix.
#include <kindling/eigen.hpp>
#include <kindling/schemes/orthogonal.hpp>

#include <Eigen/Dense>
#include <cstdio>

int main() {
  Eigen::MatrixXd q(6, 6);
  kindling::initialize(kindling::view_of(q), kindling::dense(6, 6), kindling::orthogonal{},
                       kindling::make_stream(1, "consumer.q"));
  const double err = (q.transpose() * q - Eigen::MatrixXd::Identity(6, 6)).cwiseAbs().maxCoeff();
  std::printf("consumer_eigen: |Q^T Q - I| = %.1e\n", err);
  return err < 1e-12 ? 0 : 1;
}
