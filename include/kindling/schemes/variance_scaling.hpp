// kindling/schemes/variance_scaling.hpp: the former name of schemes/fan_scaled.hpp,
// kept so that code including it still builds. Include fan_scaled.hpp instead.
#ifndef KINDLING_SCHEMES_VARIANCE_SCALING_HPP
#define KINDLING_SCHEMES_VARIANCE_SCALING_HPP

#include "fan_scaled.hpp"

#endif  // KINDLING_SCHEMES_VARIANCE_SCALING_HPP
