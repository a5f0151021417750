// first error: kindling::he_uniform and he_normal take a negative slope \(a number\) or a rectifier
// A name where the slope or the rectifier goes; he_normal{activation::leaky_relu(0.1)}
// compiles.
#include "kindling/schemes/fan_scaled.hpp"

int main() {
  const kindling::he_normal scheme{"leaky_relu"};
  (void)scheme;
}
