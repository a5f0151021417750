# Cross-check of the sample transforms against scipy.stats and numpy (Debian
# python3-scipy, python3-numpy, run with /usr/bin/python3): a small program prints
# kindling's values, tests/sample/scipy_reference.py compares them.
add_executable(kindling_sample_reference ${CMAKE_CURRENT_SOURCE_DIR}/sample/reference_printer.cc)
target_link_libraries(kindling_sample_reference PRIVATE kindling kindling_warnings)
add_test(NAME "sample: scipy reference (norm.cdf, norm.ppf, truncnorm.std, kstest, numpy float16)"
         COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/sample/scipy_reference.py
                 $<TARGET_FILE:kindling_sample_reference>)
# Building the area's test binary builds the printer too, so its ctest entry can run.
if(TARGET kindling_test_sample)
  add_dependencies(kindling_test_sample kindling_sample_reference)
endif()
