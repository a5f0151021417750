// kindling/audit.hpp: every audit in one include: conformance of a tensor with its scheme
// (check_scheme, check_distribution), the Kolmogorov-Smirnov statistic and p-values,
// symmetry of units, the structured schemes' checks (orthogonal, sparse, identity) and
// identify_scheme, with the reports they return.
//
// Needs Eigen (identify_scheme tells orthogonal tensors apart). The test-framework glue,
// kindling/audit/doctest.hpp and kindling/audit/gtest.hpp, is left out: each needs its
// framework's header.
#ifndef KINDLING_AUDIT_HPP
#define KINDLING_AUDIT_HPP

#include "kindling/audit/conformance.hpp"
#include "kindling/audit/identify.hpp"
#include "kindling/audit/kolmogorov.hpp"
#include "kindling/audit/result.hpp"
#include "kindling/audit/structure.hpp"
#include "kindling/audit/symmetry.hpp"

#endif  // KINDLING_AUDIT_HPP
