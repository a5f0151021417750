# tests/io/ (kindling/io/): manifest.hpp reads JSON with nlohmann-json, npz.cpp needs
# the kindling::npz target (zlib).
if(TARGET kindling_test_io)
  find_package(nlohmann_json CONFIG REQUIRED)
  target_link_libraries(kindling_test_io PRIVATE nlohmann_json::nlohmann_json)
  if(NOT TARGET kindling_npz)
    message(FATAL_ERROR "kindling's tests need zlib for .npz files (Debian zlib1g-dev)")
  endif()
  target_link_libraries(kindling_test_io PRIVATE kindling_npz)  # npz.cpp
endif()
