// Test-side helper for the JSON plans of io/manifest.hpp: the message a plan text is
// refused with, so the rules and the manifest tests check the same way that a bad plan
// names its key and what was expected.
#ifndef KINDLING_TESTS_SUPPORT_PLAN_ERROR_HPP
#define KINDLING_TESTS_SUPPORT_PLAN_ERROR_HPP

#include <cstdint>
#include <stdexcept>
#include <string>

#include "errors.hpp"
#include "kindling/io/manifest.hpp"

namespace kindling_test {

// what() of the std::invalid_argument plan_from_json throws for `text` (a plan whose
// source is named "P"), or "" if the plan is accepted.
inline std::string plan_error(const std::string& text) {
  return message_of<std::invalid_argument>([&] {
    std::uint64_t seed = 0;
    (void)kindling::plan_from_json(kindling::parse_json_once(text, "P"), "P", &seed);
  });
}

}  // namespace kindling_test

#endif  // KINDLING_TESTS_SUPPORT_PLAN_ERROR_HPP
