// Baseline of bench/compile_times.py: the loop a user writes without kindling.
#include <random>
#include <vector>

int main() {
  std::vector<float> w(256 * 128);
  std::mt19937 engine(42);
  std::normal_distribution<float> normal(0.0f, 0.125f);
  for (float& x : w) x = normal(engine);
  return w[3] > 100.0f ? 1 : 0;
}
