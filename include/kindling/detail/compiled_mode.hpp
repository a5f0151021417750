// Header-only or compiled: the two ways kindling is built into a program.
//
// Header-only (the default) needs nothing but the include path: every file that fills a
// tensor compiles the code it reaches, the vector kernels of random/detail/ included.
// Compiled mode (KINDLING_COMPILED, which the kindling::compiled CMake target sets for
// its users) compiles that code once, into the library built from src/: the headers
// then only declare it (KINDLING_COMPILED_INLINE is empty, KINDLING_COMPILED_DEFINITIONS
// undefined) and name its template instances `extern template`, so a user's file
// neither parses the intrinsics headers nor optimizes the kernels again. The library's
// own sources define KINDLING_COMPILED_LIBRARY to get the definitions. The code is the
// same in both modes, so the values are the same bits (tests/digest builds both).
//
// Every file of a program uses one mode: the CMake targets take care of it.
#ifndef KINDLING_DETAIL_COMPILED_MODE_HPP
#define KINDLING_DETAIL_COMPILED_MODE_HPP

#if defined(KINDLING_COMPILED)
#define KINDLING_COMPILED_INLINE
#else
#define KINDLING_COMPILED_INLINE inline
#endif

#if !defined(KINDLING_COMPILED) || defined(KINDLING_COMPILED_LIBRARY)
#define KINDLING_COMPILED_DEFINITIONS 1
#endif

#endif  // KINDLING_DETAIL_COMPILED_MODE_HPP
