// Test-side helper: the message of the exception a call throws, so tests can check that
// it names the argument and what was expected.
#ifndef KINDLING_TESTS_SUPPORT_ERRORS_HPP
#define KINDLING_TESTS_SUPPORT_ERRORS_HPP

#include <cstddef>
#include <cstring>
#include <string>
#include <vector>

namespace kindling_test {

// Memory filled with one value and a copy of it, so that a test can tell whether a call
// that was refused left every byte as it was ("validate first, then write").
template <class T>
struct guarded_memory {
  std::vector<T> memory;
  std::vector<T> before;
  guarded_memory(std::size_t n, T value) : memory(n, value), before(memory) {}
  T* data() { return memory.data(); }
  bool untouched() const { return std::memcmp(memory.data(), before.data(), memory.size() * sizeof(T)) == 0; }
};

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
