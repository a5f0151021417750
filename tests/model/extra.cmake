# tests/model/ (kindling/model/): rules.cpp also reads plans written with rules through
# io/manifest.hpp, which needs nlohmann-json.
if(TARGET kindling_test_model)
  find_package(nlohmann_json CONFIG REQUIRED)
  target_link_libraries(kindling_test_model PRIVATE nlohmann_json::nlohmann_json)
endif()
