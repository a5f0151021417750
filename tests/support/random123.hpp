// Test-side include of Random123's Philox (Debian librandom123-dev), the outside reference
// the Philox tests compare against.
#ifndef KINDLING_TESTS_SUPPORT_RANDOM123_HPP
#define KINDLING_TESTS_SUPPORT_RANDOM123_HPP

// Random123 is written for C and C++98; silence only what our strict set finds in it.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wpedantic"
#pragma GCC diagnostic ignored "-Wconversion"
#pragma GCC diagnostic ignored "-Wsign-conversion"
#pragma GCC diagnostic ignored "-Wshadow"
#pragma GCC diagnostic ignored "-Wold-style-cast"
#pragma GCC diagnostic ignored "-Wunused-parameter"
#include <Random123/philox.h>
#pragma GCC diagnostic pop
// Random123 also defines C macros of these names; we use its r123:: classes only.
#undef philox2x32
#undef philox4x32
#undef philox2x64
#undef philox4x64

#endif  // KINDLING_TESTS_SUPPORT_RANDOM123_HPP
