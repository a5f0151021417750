// Tests of kindling/eigen.hpp: views of Eigen dense objects and tensors, Eigen::half
// and Eigen::bfloat16 elements, fill() on Eigen objects.
#include "kindling/eigen.hpp"

#include <doctest/doctest.h>

#include <Eigen/Dense>
#include <unsupported/Eigen/CXX11/Tensor>

#include <cstdint>
#include <cstring>
#include <stdexcept>
#include <string>
#include <vector>

using kindling::shape;
using kindling::strided_view;
namespace dist = kindling::dist;
namespace domain = kindling::domain;

namespace {

using row_major_matrix = Eigen::Matrix<float, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;

const kindling::stream pump = kindling::make_stream(77, "pump_vibration.classifier.weight");

// The row-major reference: the whole tensor of `global` filled through raw memory.
template <class E, class D>
std::vector<E> raw_fill(const shape& global, const D& d, const kindling::stream& s) {
  std::vector<E> out(global.element_count());
  kindling::fill(strided_view<E>(out.data(), global), d, s);
  return out;
}

template <class M, class E>
bool matches_row_major(const M& m, const std::vector<E>& reference) {
  for (Eigen::Index i = 0; i < m.rows(); ++i)
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      const auto at = static_cast<std::size_t>(i * m.cols() + j);
      if (std::memcmp(&m(i, j), &reference[at], sizeof(E)) != 0) return false;
    }
  return true;
}

}  // namespace

TEST_CASE("an Eigen matrix gets the same value at (i, j) in either storage order") {
  const dist::normal d{0.0, 0.1};
  const auto reference = raw_fill<float>({23, 17}, d, pump);
  Eigen::MatrixXf col(23, 17);
  row_major_matrix row(23, 17);
  Eigen::ArrayXXf array(23, 17);
  kindling::fill(col, d, pump);
  kindling::fill(row, d, pump, domain::values, kindling::thread_executor(2));
  kindling::fill(array, d, pump);
  CHECK(kindling::view_of(col).global_shape() == shape{23, 17});
  CHECK(kindling::view_of(col).memory_strides() == kindling::strides{1, 23});
  CHECK(kindling::view_of(row).memory_strides() == kindling::strides{17, 1});
  CHECK_MESSAGE(matches_row_major(col, reference), "column-major Matrix must match the row-major reference");
  CHECK_MESSAGE(matches_row_major(row, reference), "row-major Matrix must match the row-major reference");
  CHECK_MESSAGE(matches_row_major(array, reference), "Array must match the row-major reference");
}

TEST_CASE("Map, Ref and Block of Eigen objects are filled through their strides") {
  const dist::uniform d{-0.5, 0.5};
  const auto reference = raw_fill<float>({6, 9}, d, pump);
  SUBCASE("a Map with padded columns leaves the padding alone") {
    std::vector<float> memory(10 * 9, 42.0f);
    Eigen::Map<Eigen::MatrixXf, 0, Eigen::OuterStride<>> map(memory.data(), 6, 9, Eigen::OuterStride<>(10));
    kindling::fill(map, d, pump);
    CHECK(matches_row_major(map, reference));
    bool padding_untouched = true;
    for (int c = 0; c < 9; ++c)
      for (int r = 6; r < 10; ++r) padding_untouched = padding_untouched && memory[std::size_t(c * 10 + r)] == 42.0f;
    CHECK(padding_untouched);
  }
  SUBCASE("a Ref to a block of a larger row-major matrix") {
    row_major_matrix big = row_major_matrix::Constant(20, 30, 42.0f);
    Eigen::Ref<row_major_matrix> ref = big.block(4, 7, 6, 9);
    kindling::fill(ref, d, pump);
    CHECK(matches_row_major(big.block(4, 7, 6, 9), reference));
    CHECK(big(3, 7) == 42.0f);
    CHECK(big(4, 6) == 42.0f);
    CHECK(big(10, 7) == 42.0f);
  }
  SUBCASE("a temporary block of a column-major matrix") {
    Eigen::MatrixXf big = Eigen::MatrixXf::Constant(20, 30, 42.0f);
    kindling::fill(big.block(2, 3, 6, 9), d, pump);
    CHECK(matches_row_major(big.block(2, 3, 6, 9), reference));
    CHECK_MESSAGE((big.array() == 42.0f).count() == 600 - 54, "only the block may be written");
  }
  SUBCASE("a transposed matrix is a cols x rows tensor") {
    Eigen::MatrixXf m(9, 6);
    kindling::fill(m.transpose(), d, pump);
    CHECK(kindling::view_of(m.transpose()).global_shape() == shape{6, 9});
    CHECK(matches_row_major(m.transpose(), reference));
  }
  SUBCASE("a read-only Ref gives a read-only view of the same memory") {
    const Eigen::MatrixXf m = Eigen::MatrixXf::Zero(6, 9);
    const Eigen::Ref<const Eigen::MatrixXf> ref = m;
    const strided_view<const float> v = kindling::view_of(ref);
    CHECK(v.data() == m.data());
    CHECK(v.memory_strides() == kindling::strides{1, 6});
  }
  SUBCASE("a vector is the same as a rank-1 tensor of its size") {
    const auto bias = raw_fill<float>({54}, d, pump);
    Eigen::VectorXf column(54);
    Eigen::RowVectorXf row(54);
    kindling::fill(column, d, pump);
    kindling::fill(row, d, pump);
    CHECK(std::memcmp(column.data(), bias.data(), 54 * sizeof(float)) == 0);
    CHECK(std::memcmp(row.data(), bias.data(), 54 * sizeof(float)) == 0);
  }
  SUBCASE("a segment of a vector is adapted too, and is a part of the vector's shape") {
    // v.segment(i, n) is an Eigen::VectorBlock, which derives from DenseBase of a Block
    // rather than of itself.
    const auto bias = raw_fill<float>({54}, d, pump);
    Eigen::VectorXf column = Eigen::VectorXf::Zero(54);
    kindling::fill(kindling::view_of(column.segment(10, 20)).as_part_of({54, 1}, {10, 0}), d, pump);
    CHECK(std::memcmp(column.data() + 10, bias.data() + 10, 20 * sizeof(float)) == 0);
    CHECK(column.head(10).isZero());
    kindling::fill(column.segment(0, 54), d, pump);  // the whole vector through the adapter
    CHECK(std::memcmp(column.data(), bias.data(), 54 * sizeof(float)) == 0);
  }
}

TEST_CASE("Eigen blocks declared as regions of a global shape assemble into the whole") {
  const dist::truncated_normal d{0.0, 1.0, -2.0, 2.0};
  const shape global{40, 50};
  Eigen::MatrixXd whole(40, 50);
  kindling::fill(whole, d, pump);
  SUBCASE("blocks of one column-major matrix, uneven and cut inside counter groups") {
    Eigen::MatrixXd assembled = Eigen::MatrixXd::Zero(40, 50);
    const int row_cuts[] = {0, 7, 8, 40};
    const int col_cuts[] = {0, 31, 50};
    for (int r = 0; r < 3; ++r)
      for (int c = 0; c < 2; ++c) {
        auto block = assembled.block(row_cuts[r], col_cuts[c], row_cuts[r + 1] - row_cuts[r], col_cuts[c + 1] - col_cuts[c]);
        kindling::fill(kindling::view_of(block).as_part_of(global, {row_cuts[r], col_cuts[c]}), d, pump);
      }
    CHECK(assembled == whole);
  }
  SUBCASE("a shard held in its own row-major matrix") {
    Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> shard(13, 50);
    kindling::fill(kindling::view_of(shard).as_part_of(global, {20, 0}), d, pump, domain::values,
                   kindling::thread_executor(3));
    CHECK(shard == whole.block(20, 0, 13, 50));
  }
  SUBCASE("a region outside the global shape is refused and nothing is written") {
    Eigen::MatrixXd shard = Eigen::MatrixXd::Constant(13, 50, 9.0);
    CHECK_THROWS_WITH_AS(kindling::fill(kindling::view_of(shard).as_part_of(global, {30, 0}), d, pump),
                         doctest::Contains("'region'"), std::invalid_argument);
    CHECK((shard.array() == 9.0).all());
  }
}

TEST_CASE("an Eigen tensor is read in row-major logical order whatever its layout") {
  const dist::normal d{1.0, 3.0};
  const shape global{7, 13, 3};
  const auto reference = raw_fill<float>(global, d, pump);
  auto matches = [&](const auto& t) {
    for (int i = 0; i < 7; ++i)
      for (int j = 0; j < 13; ++j)
        for (int k = 0; k < 3; ++k)
          if (std::memcmp(&t(i, j, k), &reference[std::size_t((i * 13 + j) * 3 + k)], sizeof(float)) != 0) return false;
    return true;
  };
  Eigen::Tensor<float, 3> col(7, 13, 3);
  Eigen::Tensor<float, 3, Eigen::RowMajor> row(7, 13, 3);
  kindling::fill(col, d, pump);
  kindling::fill(row, d, pump, domain::values, kindling::thread_executor(2));
  CHECK(kindling::view_of(col).memory_strides() == kindling::strides{1, 7, 91});
  CHECK_MESSAGE(matches(col), "column-major tensor (Eigen's default) must match the row-major reference");
  CHECK_MESSAGE(matches(row), "row-major tensor must match the row-major reference");
  std::vector<float> memory(7 * 13 * 3);
  Eigen::TensorMap<Eigen::Tensor<float, 3>> map(memory.data(), 7, 13, 3);
  kindling::fill(map, d, pump);
  CHECK(matches(map));
  const Eigen::Tensor<float, 3>& read_only = col;
  CHECK(kindling::view_of(read_only).data() == col.data());
}

TEST_CASE("Eigen::half and Eigen::bfloat16 are filled as float16 and bfloat16, rounded as Eigen rounds") {
  // External check: Eigen's own float -> half / bfloat16 conversions round to nearest
  // even; an unbounded normal never needs the bound step, so every element must equal
  // Eigen's conversion of the float value drawn for it.
  const dist::normal d{0.0, 2.0};
  const shape global{31, 33};
  const auto as_float = raw_fill<float>(global, d, pump);
  const auto as_f16 = raw_fill<kindling::float16>(global, d, pump);
  const auto as_b16 = raw_fill<kindling::bfloat16>(global, d, pump);
  Eigen::Matrix<Eigen::half, Eigen::Dynamic, Eigen::Dynamic> h(31, 33);
  Eigen::Matrix<Eigen::bfloat16, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> b(31, 33);
  kindling::fill(h, d, pump);
  kindling::fill(b, d, pump);
  CHECK(matches_row_major(h, as_f16));
  CHECK(matches_row_major(b, as_b16));
  bool eigen_agrees = true;
  bool to_double_agrees = true;
  for (int i = 0; i < 31; ++i)
    for (int j = 0; j < 33; ++j) {
      const float x = as_float[std::size_t(i * 33 + j)];
      eigen_agrees = eigen_agrees &&
                     Eigen::numext::bit_cast<std::uint16_t>(h(i, j)) == Eigen::numext::bit_cast<std::uint16_t>(Eigen::half(x)) &&
                     Eigen::numext::bit_cast<std::uint16_t>(b(i, j)) ==
                         Eigen::numext::bit_cast<std::uint16_t>(Eigen::bfloat16(x));
      to_double_agrees = to_double_agrees &&
                         kindling::element_traits<Eigen::half>::to_double(h(i, j)) == static_cast<double>(float(h(i, j))) &&
                         kindling::element_traits<Eigen::bfloat16>::to_double(b(i, j)) == static_cast<double>(float(b(i, j)));
    }
  CHECK_MESSAGE(eigen_agrees, "each half/bfloat16 must be Eigen's rounding of the float value");
  CHECK(to_double_agrees);
  CHECK(std::string(kindling::element_traits<Eigen::half>::name) == kindling::element_traits<kindling::float16>::name);
}

TEST_CASE("an empty Eigen object or a bad distribution is refused and the matrix left untouched") {
  Eigen::MatrixXf empty(0, 5);
  CHECK_THROWS_WITH_AS(kindling::view_of(empty), doctest::Contains("extent 0 in dimension 0"), std::invalid_argument);
  Eigen::MatrixXf m = Eigen::MatrixXf::Constant(4, 4, 2.0f);
  CHECK_THROWS_AS(kindling::fill(m, dist::uniform{2.0, 2.0}, pump), std::domain_error);
  CHECK((m.array() == 2.0f).all());
}
