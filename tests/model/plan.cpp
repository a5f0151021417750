// Tests of kindling/model/plan.hpp with plans built in C++ (the JSON form of a plan is
// tested in tests/io/manifest.cpp): a parameter's values are those of its own
// initialize() call, its bytes are those values, and a bad plan or storage is refused
// before anything is written, naming the parameter.
#include <doctest/doctest.h>

#include <cstring>
#include <stdexcept>
#include <string>
#include <vector>

#include "../support/errors.hpp"
#include "kindling/model/plan.hpp"

using namespace kindling;
using kindling_test::mentions;
using kindling_test::message_of;

namespace {

// A heat exchanger's outlet-temperature model: a dense layer from 6 sensor readings to
// 12 units, its bias, and a 3-gate recurrent weight over those units.
model_plan exchanger_plan() {
  model_plan plan;
  model_parameter w;
  w.name = "inlet.weight";
  w.layer = dense(6, 12);
  w.scheme = parse_scheme("glorot-uniform");
  model_parameter b;
  b.name = "inlet.bias";
  b.layer = bias_vector{12};
  b.scheme = parse_scheme("constant(value=0.25)");
  model_parameter g;
  g.name = "cell.w_hh";
  g.element = element_kind::f64;
  g.layer = packed_dense::gru(12, 12);
  g.scheme = parse_scheme("orthogonal");
  g.gate_order = {"reset", "update", "new"};
  plan.parameters = {w, b, g};
  return plan;
}

}  // namespace

TEST_CASE("initialize_parameter writes the bits of initialize() under the parameter's own stream") {
  const model_plan plan = exchanger_plan();
  const model_parameter& w = plan.parameters[0];
  std::vector<float> mine(72), direct(72);
  initialize_parameter(w, 7, strided_view<float>(mine.data(), shape{12, 6}));
  initialize(strided_view<float>(direct.data(), shape{12, 6}), dense(6, 12), glorot_uniform{}, make_stream(7, "inlet.weight"));
  CHECK(std::memcmp(mine.data(), direct.data(), mine.size() * sizeof(float)) == 0);
  // parameter_bytes gives the same values as little-endian bytes, whatever its block size.
  parameter_bytes bytes(w, 7, 24);
  REQUIRE(bytes.size() == 72 * sizeof(float));
  std::vector<unsigned char> read(bytes.size());
  bytes.read(0, reinterpret_cast<char*>(read.data()), read.size());
  std::vector<unsigned char> expected(read.size());
  std::memcpy(expected.data(), direct.data(), expected.size());
  to_little_endian(expected.data(), direct.size(), sizeof(float));
  CHECK(read == expected);
}

TEST_CASE("check_plan refuses a bad parameter in the one message style, naming the parameter") {
  model_plan plan = exchanger_plan();
  CHECK_NOTHROW(check_plan(plan));
  SUBCASE("two parameters of one name") {
    plan.parameters[1].name = "inlet.weight";
    CHECK(message_of<std::invalid_argument>([&] { check_plan(plan); }) ==
          "kindling::check_plan: argument 'name' = 'inlet.weight', expected each name once in the plan (it appears "
          "twice)");
  }
  SUBCASE("an empty name") {
    plan.parameters[0].name.clear();
    CHECK(mentions(message_of<std::invalid_argument>([&] { check_plan(plan); }),
                   "kindling::check_plan: argument 'name' = '', expected a parameter name"));
  }
  SUBCASE("a gate label missing") {
    plan.parameters[2].gate_order.pop_back();
    CHECK(message_of<std::invalid_argument>([&] { check_plan(plan); }) ==
          "parameter 'cell.w_hh': kindling::check_plan: argument 'gate_order' = 2 labels, expected one label for each "
          "block of a packed layer");
  }
  SUBCASE("a scheme its layer cannot take") {
    plan.parameters[1].scheme = parse_scheme("orthogonal");  // a bias is rank 1
    CHECK(mentions(message_of<std::invalid_argument>([&] { check_plan(plan); }), "parameter 'inlet.bias': kindling::"));
  }
}

TEST_CASE("initialize_parameter and initialize_model refuse storage of another type or shape, writing nothing") {
  const model_plan plan = exchanger_plan();
  std::vector<double> memory(72, 5.0);
  CHECK(message_of<std::invalid_argument>(
            [&] { initialize_parameter(plan.parameters[0], 7, strided_view<double>(memory.data(), shape{12, 6})); }) ==
        "kindling::initialize_parameter: argument 'v' = a view of f64 elements, expected f32 elements, the element "
        "type of parameter 'inlet.weight'");
  CHECK(message_of<std::invalid_argument>(
            [&] { initialize_parameter(plan.parameters[2], 7, strided_view<double>(memory.data(), shape{6, 12})); }) ==
        "kindling::initialize_parameter: argument 'v' = a view of global shape [6, 12], expected the global shape "
        "[36, 12] of parameter 'cell.w_hh'");
  CHECK(memory == std::vector<double>(72, 5.0));
}
