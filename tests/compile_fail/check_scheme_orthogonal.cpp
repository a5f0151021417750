// first error: check_scheme needs a scheme with distribution\(fans\); for orthogonal or delta_orthogonal use check_orthogonal
// check_scheme asked to audit a structured scheme, which has no element-wise distribution.
#include <vector>

#include "kindling/audit/conformance.hpp"
#include "kindling/schemes/orthogonal.hpp"

int main() {
  std::vector<float> w(16);
  const kindling::strided_view<float> v(w.data(), kindling::shape(4, 4));
  (void)kindling::check_scheme(v, kindling::dense(4, 4), kindling::orthogonal{});
}
