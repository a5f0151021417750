// A trainer that keeps each parameter in shards (one per worker) and fills them on its
// own thread pool: every shard gets exactly the values of its rows of the whole tensor.
#include <kindling/kindling.hpp>

#include <cstdio>
#include <functional>
#include <thread>
#include <vector>

namespace {

// Stand-in for the trainer's own pool: runs task(0..n-1) on a few threads.
struct trainer_pool {
  unsigned workers = 2;
  void parallel_for(std::size_t n, const std::function<void(std::size_t)>& task) const {
    std::vector<std::thread> threads;
    for (unsigned w = 0; w < workers; ++w) {
      threads.emplace_back([&, w] {
        for (std::size_t k = w; k < n; k += workers) task(k);
      });
    }
    for (auto& t : threads) t.join();
  }
};

}  // namespace

int main() {
  using namespace kindling;
  const trainer_pool pool;
  // Any callable (n_tasks, task) is an executor: here, the trainer's pool.
  const auto on_pool = [&pool](std::size_t n, const std::function<void(std::size_t)>& task) {
    pool.parallel_for(n, task);
  };

  // The 1024 x 512 weight of a surrogate model's first layer, in 3 uneven row shards.
  const dense layer(512, 1024);
  const stream s = make_stream(7, "surrogate.layer1.weight");
  const std::uint64_t cuts[] = {0, 300, 701, 1024};
  std::vector<std::vector<float>> shards;
  for (int k = 0; k < 3; ++k) {
    const std::uint64_t rows = cuts[k + 1] - cuts[k];
    shards.emplace_back(rows * 512);
    const strided_view<float> mine(shards.back().data(), shape(1024, 512), region(shape(cuts[k], 0), shape(rows, 512)));
    initialize(mine, layer, he_normal{}, s, on_pool);
  }

  // The serial fill of the whole tensor, for comparison.
  std::vector<float> whole(1024 * 512);
  initialize(strided_view<float>(whole.data(), shape(1024, 512)), layer, he_normal{}, s);

  bool same = true;
  for (int k = 0; k < 3; ++k) {
    const float* expected = whole.data() + cuts[k] * 512;
    for (std::size_t i = 0; i < shards[k].size(); ++i) same = same && shards[k][i] == expected[i];
  }
  std::printf("3 shards filled on the trainer's pool %s the serial fill\n", same ? "equal" : "DIFFER FROM");
  return same ? 0 : 1;
}
