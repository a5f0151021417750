// first error: kindling::glorot_uniform and glorot_normal take a gain \(a number\) or an activation
// An activation kind (an enumerator) where the gain or the activation goes; the
// activation itself, glorot_uniform{activation::tanh()}, compiles.
#include "kindling/schemes/fan_scaled.hpp"

int main() {
  const kindling::glorot_uniform scheme{kindling::activation_kind::tanh};
  (void)scheme;
}
