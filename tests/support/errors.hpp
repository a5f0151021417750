// Test-side helper: the message of the exception a call throws, so tests can check that
// it names the argument and what was expected.
#ifndef KINDLING_TESTS_SUPPORT_ERRORS_HPP
#define KINDLING_TESTS_SUPPORT_ERRORS_HPP

#include <string>

namespace kindling_test {

// Runs f; returns what() of the exception of type Ex it throws, or "" if it throws none.
template <class Ex, class F>
std::string message_of(F&& f) {
  try {
    f();
  } catch (const Ex& e) {
    return e.what();
  }
  return "";
}

inline bool mentions(const std::string& message, const std::string& part) {
  return message.find(part) != std::string::npos;
}

}  // namespace kindling_test

#endif
