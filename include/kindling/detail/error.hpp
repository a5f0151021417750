// One message style for the errors of the core:
//
//   kindling::<function>: argument '<name>' = <value>, expected <what>
//
// so that a message names the call, the argument, the value it was given and what
// would have been accepted (DESIGN.md, "Errors and bad input").
#ifndef KINDLING_DETAIL_ERROR_HPP
#define KINDLING_DETAIL_ERROR_HPP

#include <cstdio>
#include <string>
#include <string_view>

#include "compiled_mode.hpp"

namespace kindling::detail {

// Declared here; defined below in the header-only mode, in the compiled library
// otherwise (detail/compiled_mode.hpp): every file that checks an argument needs them.
KINDLING_COMPILED_INLINE std::string argument_text(double x);
KINDLING_COMPILED_INLINE std::string argument_message(std::string_view function, std::string_view name,
                                                      std::string_view value, std::string_view expected);

#if defined(KINDLING_COMPILED_DEFINITIONS)
// A number as a message shows it: every digit a double needs (%.17g), so that the value
// refused can be typed back in exactly.
KINDLING_COMPILED_INLINE std::string argument_text(double x) {
  char buffer[40];
  std::snprintf(buffer, sizeof buffer, "%.17g", x);
  return buffer;
}

// "kindling::<function>: argument '<name>' = <value>, expected <what>". `function` may
// carry the "kindling::" prefix already (many checks pass their caller's full name on).
KINDLING_COMPILED_INLINE std::string argument_message(std::string_view function, std::string_view name,
                                                      std::string_view value, std::string_view expected) {
  constexpr std::string_view prefix = "kindling::";
  if (function.substr(0, prefix.size()) == prefix) function.remove_prefix(prefix.size());
  std::string m(prefix);
  m.append(function).append(": argument '").append(name).append("' = ").append(value);
  m.append(", expected ").append(expected);
  return m;
}
#endif

// Throws Error (a std::invalid_argument, std::domain_error or std::length_error) with
// argument_message.
template <class Error>
[[noreturn]] void reject_argument(std::string_view function, std::string_view name,
                                  std::string_view value, std::string_view expected) {
  throw Error(argument_message(function, name, value, expected));
}

}  // namespace kindling::detail

#endif  // KINDLING_DETAIL_ERROR_HPP
