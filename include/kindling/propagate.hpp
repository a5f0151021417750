// kindling/propagate.hpp: the propagation analysis in one include: layer stacks and
// their predicted variances (mean field, the linear regime, the edge of chaos), measured
// passes and their diagnostics, convolutions on feature maps, LSUV and Fixup.
//
// Needs Eigen (the measured passes). A program that only predicts can include
// kindling/propagate/mean_field.hpp alone, which needs the standard library only.
#ifndef KINDLING_PROPAGATE_HPP
#define KINDLING_PROPAGATE_HPP

#include "kindling/propagate/convolution_map.hpp"
#include "kindling/propagate/convolution_pass.hpp"
#include "kindling/propagate/criticality.hpp"
#include "kindling/propagate/diagnose.hpp"
#include "kindling/propagate/fixup.hpp"
#include "kindling/propagate/linear.hpp"
#include "kindling/propagate/lsuv.hpp"
#include "kindling/propagate/mean_field.hpp"
#include "kindling/propagate/measure.hpp"
#include "kindling/propagate/stack.hpp"

#endif  // KINDLING_PROPAGATE_HPP
