// kindling/propagate/linear.hpp: Glorot & Bengio's linear-regime products
// (AISTATS 2010, sec. 4.2, eqs. 5-7).  With units in their linear regime (f'(0) = 1,
// zero biases), the variances of the pre-activations z^i and of the gradients with
// respect to them are products over the layers:
//   Var[z^i]       = Var[x] prod_{i' <= i} n_{i'} Var[W^{i'}]            (n_{i'}: fan-in)
//   Var[dC/dz^i]   = Var[dC/dz^d] prod_{i' > i} n_{i'+1} Var[W^{i'}]     (fan-out)
// They ignore the activations and biases of the stack on purpose: they are the
// reference against which a nonlinearity's effect is judged.
#ifndef KINDLING_PROPAGATE_LINEAR_HPP
#define KINDLING_PROPAGATE_LINEAR_HPP

#include <vector>

#include "stack.hpp"

namespace kindling {

struct linear_products {
  std::vector<double> forward;   // Var[z^i], i = 1..depth
  std::vector<double> backward;  // Var[dC/dz^i], with Var[dC/dz^depth] = output_gradient_variance
};

inline linear_products glorot_products(const layer_stack& stack,
                                       double output_gradient_variance = 1.0) {
  constexpr const char* where = "kindling::glorot_products";
  stack.require_layers(where);
  if (!(std::isfinite(output_gradient_variance) && output_gradient_variance > 0.0)) {
    throw std::domain_error(std::string(where) + ": argument 'output_gradient_variance' = " +
                            detail::argument_text(output_gradient_variance) +
                            ", expected a finite number > 0");
  }
  const auto& layers = stack.layers();
  linear_products p;
  p.forward.resize(layers.size());
  p.backward.resize(layers.size());
  double v = stack.input_second_moment();
  for (std::size_t i = 0; i < layers.size(); ++i) {
    v *= layers[i].forward_scale();
    p.forward[i] = v;
  }
  double g = output_gradient_variance;
  for (std::size_t i = layers.size(); i-- > 0;) {
    p.backward[i] = g;
    g *= layers[i].backward_scale();
  }
  return p;
}

}  // namespace kindling

#endif  // KINDLING_PROPAGATE_LINEAR_HPP
