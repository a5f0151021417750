// Packaging test: the npz component (kindling::npz, which brings zlib) from an
// installed prefix: a deflated .npz written and read back.
#include <kindling/io/npz.hpp>

#include <cstdio>
#include <vector>

int main() {
  std::vector<float> w(64, 0.5f);
  kindling::npz_options o;
  o.compress = true;
  kindling::write_npz("consumer_npz.npz", {{"consumer.w", kindling::make_npy<float>({8, 8}, w)}}, o);
  const auto back = kindling::read_npz("consumer_npz.npz");
  const bool same = back.at("consumer.w").values() == std::vector<double>(64, 0.5);
  std::remove("consumer_npz.npz");
  std::printf("consumer_npz: %s\n", same ? "read back the same 64 values" : "values differ");
  return same ? 0 : 1;
}
