// Test-side helpers shared by the scheme tests: a weight filled by a scheme into fresh
// row-major memory, and its elements read back as double.
#ifndef KINDLING_TESTS_SUPPORT_LAYER_FILL_HPP
#define KINDLING_TESTS_SUPPORT_LAYER_FILL_HPP

#include <cstddef>
#include <vector>

#include "kindling/element.hpp"
#include "kindling/random/stream.hpp"
#include "kindling/schemes/scheme.hpp"
#include "kindling/view.hpp"

namespace kindling_test {

template <class E>
double as_double(E x) {
  return kindling::element_traits<E>::to_double(x);
}

// The whole weight of `global` (row-major memory) filled by `scheme` from stream st.
// `layer` is a layer description (dense, convolution, ...) or a weight_info; a bare `{}`
// is a default weight_info.
template <class E, class Layer = kindling::weight_info, class Scheme>
std::vector<E> filled(const kindling::shape& global, const Layer& layer, const Scheme& scheme,
                      const kindling::stream& st) {
  std::vector<E> memory(static_cast<std::size_t>(global.element_count()));
  kindling::initialize(kindling::strided_view<E>(memory.data(), global), layer, scheme, st);
  return memory;
}

}  // namespace kindling_test

#endif  // KINDLING_TESTS_SUPPORT_LAYER_FILL_HPP
