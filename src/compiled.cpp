// The compiled library of kindling (the kindling::compiled CMake target), compiled once
// here instead of in every file that includes kindling: the vector kernels of
// random/detail/, the fills of the four distributions, the views and rounders of every
// element type with the argument checks of views and layers (view.hpp, fan.hpp,
// detail/error.hpp), and the audits' passes (audit/conformance.hpp, audit/symmetry.hpp).
// Users' files get KINDLING_COMPILED, which turns those definitions into declarations
// (detail/compiled_mode.hpp) and the instances below into `extern template`
// declarations. The code is the same header code, so the values are the same bits
// (tests/digest) and the verdicts the same (tests/package/run.sh).
#ifndef KINDLING_COMPILED
#error "src/compiled.cpp is built with KINDLING_COMPILED (the kindling::compiled target sets it)"
#endif
#define KINDLING_COMPILED_LIBRARY 1

#include "kindling/audit/conformance.hpp"
#include "kindling/audit/symmetry.hpp"
#include "kindling/detail/error.hpp"
#include "kindling/fan.hpp"
#include "kindling/fill.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/view.hpp"
// With Eigen (the target then sets KINDLING_COMPILED_ORTHOGONAL): the Householder QR of
// the orthogonal schemes, haar_orthogonal, the costliest code of a file using them.
#if defined(KINDLING_COMPILED_ORTHOGONAL)
#include "kindling/schemes/orthogonal.hpp"
#endif

namespace kindling::detail {

// The dispatch of random/detail/lanes.hpp for every kernel with a vector path.
#define KINDLING_LANES_INSTANCE(K)                                                                   \
  template bool groups_f32<K<float>>(instruction_set, const K<float>&, const philox4x32_key&,        \
                                     std::uint32_t, std::uint64_t, std::uint64_t, float*) noexcept;  \
  template bool groups_f32_elements<K<float>>(instruction_set, const K<float>&,                      \
                                              const philox4x32_key&, std::uint32_t, std::uint64_t,   \
                                              std::uint64_t, float*, float, float, bool) noexcept;   \
  template bool groups_bf16_elements<K<float>>(instruction_set, const K<float>&,                     \
                                               const philox4x32_key&, std::uint32_t, std::uint64_t,  \
                                               std::uint64_t, std::uint16_t*, float, float,          \
                                               bool) noexcept;
KINDLING_LANES_INSTANCE(uniform_kernel)
KINDLING_LANES_INSTANCE(symmetric_uniform_kernel)
KINDLING_LANES_INSTANCE(normal_kernel)
KINDLING_LANES_INSTANCE(truncated_normal_kernel)
template bool groups_f64<normal_kernel<double>>(instruction_set, const normal_kernel<double>&,
                                                const philox4x32_key&, std::uint32_t, std::uint64_t,
                                                std::uint64_t, double*) noexcept;

// The runs of every kernel, and the chunk fills of every element type.
#define KINDLING_DEFINE_RUN(C, K) KINDLING_RUN_INSTANCE(template, C, K)
KINDLING_FOR_EACH_KERNEL(KINDLING_DEFINE_RUN)
KINDLING_FILL_INSTANCES(template)

// The audits' passes (audit/conformance.hpp, audit/symmetry.hpp) of every element type.
KINDLING_AUDIT_INSTANCES(KINDLING_CONFORMANCE_INSTANCE, template)

}  // namespace kindling::detail

namespace kindling {
// The views and rounders of every element type (fill.hpp).
KINDLING_VIEW_INSTANCES(template)
KINDLING_AUDIT_INSTANCES(KINDLING_SYMMETRY_INSTANCE, template)
}  // namespace kindling
