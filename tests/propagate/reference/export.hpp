// What the propagation printers share (print_attention, print_recurrent,
// print_convolution): a drawn matrix written as a .npy file for the NumPy check beside
// them, and a main that takes the one directory those files go to.
// Not a doctest header: the printers have their own main (built by
// kindling_reference_check).
#ifndef KINDLING_TESTS_PROPAGATE_REFERENCE_EXPORT_HPP
#define KINDLING_TESTS_PROPAGATE_REFERENCE_EXPORT_HPP

#include <cstdint>
#include <cstdio>
#include <string>
#include <utility>
#include <vector>

#include <Eigen/Core>

#include "kindling/io/npy.hpp"

namespace kindling_test {
// Writes m's values in row-major order as a .npy array of the given shape (a convolution
// kernel's [out, in / groups, taps...] for a matrix of out rows).
inline void save_npy(const std::string& path, std::vector<std::uint64_t> shape, const Eigen::MatrixXd& m) {
  std::vector<double> values;
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) values.push_back(m(i, j));
  kindling::write_npy(path, kindling::make_npy(std::move(shape), values));
}

// The same with m's own shape, [rows, columns].
inline void save_npy(const std::string& path, const Eigen::MatrixXd& m) {
  save_npy(path, {static_cast<std::uint64_t>(m.rows()), static_cast<std::uint64_t>(m.cols())}, m);
}

// A printer's main: `export_all(directory)` with the one argument, a directory, where the
// .npy files go; 2 with a usage line if the arguments are not that.
template <class ExportAll>
int export_to_directory(int argc, char** argv, ExportAll export_all) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: %s DIRECTORY\n", argv[0]);
    return 2;
  }
  export_all(std::string(argv[1]));
  return 0;
}
}  // namespace kindling_test

#endif  // KINDLING_TESTS_PROPAGATE_REFERENCE_EXPORT_HPP
