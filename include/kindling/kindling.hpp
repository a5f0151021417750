// kindling/kindling.hpp: the core of kindling in one include (standard library only).
//
// Adapters and the schemes that need linear algebra are separate, so that users of the
// core pull in nothing else: kindling/eigen.hpp, kindling/xtensor.hpp,
// kindling/schemes/orthogonal.hpp (Eigen).
#ifndef KINDLING_KINDLING_HPP
#define KINDLING_KINDLING_HPP

#include "kindling/element.hpp"
#include "kindling/executor.hpp"
#include "kindling/fan.hpp"
#include "kindling/fill.hpp"
#include "kindling/gain.hpp"
#include "kindling/random/philox.hpp"
#include "kindling/random/philox_engine.hpp"
#include "kindling/random/sample.hpp"
#include "kindling/random/siphash.hpp"
#include "kindling/random/stream.hpp"
#include "kindling/schemes/bias.hpp"
#include "kindling/schemes/constant.hpp"
#include "kindling/schemes/fixed.hpp"
#include "kindling/schemes/identity.hpp"
#include "kindling/schemes/scheme.hpp"
#include "kindling/schemes/sparse.hpp"
#include "kindling/schemes/fan_scaled.hpp"
#include "kindling/view.hpp"

#endif  // KINDLING_KINDLING_HPP
