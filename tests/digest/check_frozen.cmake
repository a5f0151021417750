# Runs the digest program and compares its lines with the frozen format-v1 file: a
# change of any value of the reproducibility format fails here, inside one build.
execute_process(COMMAND ${DIGEST} OUTPUT_VARIABLE actual RESULT_VARIABLE rc)
if(NOT rc EQUAL 0)
  message(FATAL_ERROR "digest program failed with ${rc}")
endif()
file(READ ${EXPECTED} expected)
if(NOT actual STREQUAL expected)
  message(FATAL_ERROR "digest lines differ from ${EXPECTED} (format version 1):\n--- expected\n${expected}--- actual\n${actual}")
endif()
message(STATUS "all digest lines equal the frozen format-v1 values")
