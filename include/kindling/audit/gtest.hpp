// kindling/audit/gtest.hpp: audits inside GoogleTest tests. audit_assertion turns a
// report into a ::testing::AssertionResult whose failure message is the explanation:
//
//   EXPECT_TRUE(kindling::audit_assertion(kindling::check_scheme(view, layer, kindling::he_normal{})));
#ifndef KINDLING_AUDIT_GTEST_HPP
#define KINDLING_AUDIT_GTEST_HPP

#include <gtest/gtest.h>

#include "result.hpp"

namespace kindling {

inline ::testing::AssertionResult audit_assertion(const audit_report& report) {
  if (report.passed()) return ::testing::AssertionSuccess() << report.explain();
  return ::testing::AssertionFailure() << report.explain();
}

}  // namespace kindling

#endif  // KINDLING_AUDIT_GTEST_HPP
