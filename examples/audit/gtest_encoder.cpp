// A unit test of a layer constructor with kindling's audits under GoogleTest.
#include <gtest/gtest.h>

#include <iostream>
#include <kindling/audit/conformance.hpp>
#include <kindling/audit/gtest.hpp>
#include <kindling/audit/symmetry.hpp>

#include "pump_encoder.hpp"

TEST(PumpEncoder, StartsHeNormalWithDistinctUnits) {
  const pump_sensor_encoder encoder(20261202);
  EXPECT_TRUE(kindling::audit_assertion(
      kindling::check_scheme(encoder.weight_view(), encoder.layer, kindling::he_normal{})));
  EXPECT_TRUE(kindling::audit_assertion(kindling::check_symmetry(encoder.weight_view())));
}

TEST(PumpEncoder, WrongFanInIsCaughtWithItsFan) {
  const pump_sensor_encoder buggy(20261202, true);
  const auto result = kindling::audit_assertion(
      kindling::check_scheme(buggy.weight_view(), buggy.layer, kindling::he_normal{}));
  EXPECT_FALSE(result);
  std::cout << result.message() << "\n";
  EXPECT_NE(std::string(result.message()).find("the value matches fan-in 128"), std::string::npos);
}
