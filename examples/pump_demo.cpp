// Demo: initialize the parameters of a small vibration classifier for a water pump and
// print what each tensor got, compared with what its scheme promises.
//
// The network reads 3-axis accelerometer windows of 256 samples:
//   conv1d 3 -> 16 channels, kernel 7, ReLU      (He normal, fan-in = 3 x 7)
//   conv1d 16 -> 32 channels, kernel 5, ReLU     (He normal, fan-in = 16 x 5)
//   LSTM 32 -> 24 hidden, packed [4 x 24, 32]    (Glorot uniform per gate block)
//   dense 24 -> 4 classes: healthy, cavitation, misalignment, bearing wear
// Bearing wear is rare in the training logs (prior 2%), so its output bias starts at
// -log(0.98 / 0.02); the LSTM's forget-gate bias starts at 1.
#include <kindling/kindling.hpp>

#include <cmath>
#include <cstdio>
#include <string>
#include <vector>

namespace {

struct summary {
  double mean = 0, sd = 0, lo = 0, hi = 0;
};

summary summarize(const std::vector<float>& x) {
  summary s;
  s.lo = s.hi = x[0];
  for (float v : x) {
    s.mean += v;
    s.lo = std::min(s.lo, static_cast<double>(v));
    s.hi = std::max(s.hi, static_cast<double>(v));
  }
  s.mean /= static_cast<double>(x.size());
  for (float v : x) s.sd += (v - s.mean) * (v - s.mean);
  s.sd = std::sqrt(s.sd / static_cast<double>(x.size()));
  return s;
}

void report(const char* name, const std::string& shape, const std::string& scheme, double expected_sd,
            const std::vector<float>& x) {
  const summary s = summarize(x);
  std::printf("%-18s %-14s %-22s %9.5f %9.5f %9.5f %9.5f\n", name, shape.c_str(), scheme.c_str(), expected_sd, s.sd,
              s.lo, s.hi);
}

}  // namespace

int main() {
  using namespace kindling;
  const std::uint64_t seed = 20261202;
  const stream model = stream::root(seed);

  std::printf("kindling demo: pump vibration classifier, seed %llu\n\n", static_cast<unsigned long long>(seed));
  std::printf("%-18s %-14s %-22s %9s %9s %9s %9s\n", "parameter", "shape", "scheme", "expect sd", "sd", "min",
              "max");

  const convolution conv1(3, 16, {7});
  std::vector<float> w1(16 * 3 * 7);
  initialize(strided_view<float>(w1.data(), shape(16, 3, 7)), conv1, he_normal{}, model.named("conv1.weight"));
  report("conv1.weight", "16x3x7", "he-normal", std::sqrt(2.0 / (3 * 7)), w1);

  const convolution conv2(16, 32, {5});
  std::vector<float> w2(32 * 16 * 5);
  initialize(strided_view<float>(w2.data(), shape(32, 16, 5)), conv2, he_normal{}, model.named("conv2.weight"));
  report("conv2.weight", "32x16x5", "he-normal", std::sqrt(2.0 / (16 * 5)), w2);

  const auto lstm = packed_dense::lstm(32, 24);
  std::vector<float> wl(96 * 32);
  initialize(strided_view<float>(wl.data(), shape(96, 32)), lstm, glorot_uniform{}, model.named("lstm.w_ih"));
  report("lstm.w_ih", "96x32", "glorot-uniform/gate", std::sqrt(2.0 / (32 + 24)), wl);

  std::vector<float> bl(96);
  initialize_bias(strided_view<float>(bl.data(), shape(96)), forget_gate_bias{});
  std::printf("%-18s %-14s %-22s forget block [24, 48) = %g, others = %g\n", "lstm.bias", "96",
              "forget-gate-bias", static_cast<double>(bl[30]), static_cast<double>(bl[0]));

  std::vector<float> wo(4 * 24);
  initialize(strided_view<float>(wo.data(), shape(4, 24)), dense(24, 4), glorot_uniform{}, model.named("head.weight"));
  report("head.weight", "4x24", "glorot-uniform", std::sqrt(2.0 / 28), wo);

  std::vector<float> bo(4, 0.0f);
  const strided_view<float> bearing(bo.data() + 3, shape(4), region(shape(3), shape(1)));
  initialize_bias(bearing, rare_class_bias{0.02});
  std::printf("%-18s %-14s %-22s %g %g %g %g\n\n", "head.bias", "4", "zero + rare-class(2%)",
              static_cast<double>(bo[0]), static_cast<double>(bo[1]), static_cast<double>(bo[2]),
              static_cast<double>(bo[3]));

  // The same tensor from 3 threads equals the serial fill, bit for bit.
  std::vector<float> again(w2.size());
  initialize(strided_view<float>(again.data(), shape(32, 16, 5)), conv2, he_normal{}, model.named("conv2.weight"),
             thread_executor(3));
  const bool same = again == w2;
  std::printf("conv2.weight filled again on 3 threads: %s\n", same ? "identical" : "DIFFERENT");
  return same ? 0 : 1;
}
