// A unit test of a layer constructor with kindling's audits under doctest.
#define DOCTEST_CONFIG_IMPLEMENT_WITH_MAIN
#include <doctest/doctest.h>

#include <iostream>
#include <kindling/audit/conformance.hpp>
#include <kindling/audit/doctest.hpp>
#include <kindling/audit/structure.hpp>
#include <kindling/schemes/orthogonal.hpp>
#include <kindling/audit/symmetry.hpp>

#include "pump_encoder.hpp"

TEST_CASE("the pump encoder starts He normal for its fan-in, with distinct units") {
  const pump_sensor_encoder encoder(20261202);
  KINDLING_CHECK_AUDIT(kindling::check_scheme(encoder.weight_view(), encoder.layer, kindling::he_normal{}));
  KINDLING_CHECK_AUDIT(kindling::check_symmetry(encoder.weight_view()));
}

TEST_CASE("a constructor with the wrong fan-in is caught, and the message says which fan it used") {
  const pump_sensor_encoder buggy(20261202, true);
  const kindling::audit_report r = kindling::check_scheme(buggy.weight_view(), buggy.layer, kindling::he_normal{});
  CHECK_FALSE(r);
  std::cout << r.explain() << "\n";  // what KINDLING_CHECK_AUDIT would print
  CHECK(r.explain().find("the value matches fan-in 128") != std::string::npos);
}

TEST_CASE("the pump's deep 1-D convolution stack starts delta-orthogonal: zero off the centre tap") {
  // 8 sensor channels in, 16 out, kernel 5 over time, in [out, in, k] order.
  const kindling::convolution conv(8, 16, {5});
  std::vector<float> w(16 * 8 * 5);
  const kindling::strided_view<float> v(w.data(), kindling::shape(16, 8, 5));
  kindling::initialize(v, conv, kindling::delta_orthogonal{}, kindling::make_stream(20261202, "pump.tcn.block1.weight"));
  KINDLING_CHECK_AUDIT(kindling::check_delta_orthogonal(v, conv));
}
