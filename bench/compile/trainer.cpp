// bench/compile_times.py, "Eigen trainer": a trainer's file with Eigen matrices, a
// packed recurrent layer and the orthogonal scheme (the case the issue measured at 19 s).
#include <kindling/eigen.hpp>
#include <kindling/kindling.hpp>
#include <kindling/schemes/orthogonal.hpp>

#include <Eigen/Dense>

int main() {
  using namespace kindling;
  const stream model = make_stream(7, "conveyor_belt");
  Eigen::MatrixXf w_in(64, 32), w_ih(3 * 48, 64), w_hh(3 * 48, 48), head(5, 48);
  Eigen::VectorXf b_ih(3 * 48), b_head(5);
  initialize(view_of(w_in), dense(32, 64), he_normal{}, model.named("belt.encoder.weight"));
  initialize(view_of(w_ih), packed_dense::gru(64, 48), glorot_uniform{}, model.named("belt.gru.w_ih"));
  initialize(view_of(w_hh), packed_dense::gru(48, 48), orthogonal{}, model.named("belt.gru.w_hh"));
  initialize(view_of(head), dense(48, 5), glorot_uniform{}, model.named("belt.head.weight"));
  initialize_bias(b_ih, zeros{});
  initialize_bias(b_head, zeros{});
  return (w_hh.transpose() * w_hh).trace() > 1e9f ? 1 : 0;
}
