// kindling/audit/doctest.hpp: audits inside doctest tests. The failure message is the
// report's explanation, one sentence per failed check. Include after doctest.h.
//
//   KINDLING_CHECK_AUDIT(kindling::check_scheme(view, layer, kindling::he_normal{}));
#ifndef KINDLING_AUDIT_DOCTEST_HPP
#define KINDLING_AUDIT_DOCTEST_HPP

#include "result.hpp"

// The report is evaluated once; a failure is recorded with its explanation.
#define KINDLING_CHECK_AUDIT(...)                                               \
  do {                                                                          \
    const ::kindling::audit_report kindling_audit_report_ = (__VA_ARGS__);      \
    CHECK_MESSAGE(kindling_audit_report_.passed(), kindling_audit_report_.explain()); \
  } while (false)

// The same, ending the test case on failure.
#define KINDLING_REQUIRE_AUDIT(...)                                             \
  do {                                                                          \
    const ::kindling::audit_report kindling_audit_report_ = (__VA_ARGS__);      \
    REQUIRE_MESSAGE(kindling_audit_report_.passed(), kindling_audit_report_.explain()); \
  } while (false)

#endif  // KINDLING_AUDIT_DOCTEST_HPP
