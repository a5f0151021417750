# cmake -DCOMPILER=c++ -DINCLUDES="<dir>|<dir>..." -DSOURCE=<case.cpp> -P first_error.cmake
# Compiles SOURCE as C++17 (syntax and template instantiation only), which must fail, and checks that the first line of the compiler's
# output containing "error" matches the expression on SOURCE's line
# "// first error: <regular expression>".
foreach(_key IN ITEMS COMPILER INCLUDES SOURCE)
  if(NOT DEFINED ${_key} OR "${${_key}}" STREQUAL "")
    message(FATAL_ERROR "first_error.cmake: argument ${_key} is missing or empty, expected -D${_key}=<value>")
  endif()
endforeach()
file(STRINGS ${SOURCE} _expect REGEX "^// first error: " LIMIT_COUNT 1)
if(NOT _expect)
  message(FATAL_ERROR "first_error.cmake: '${SOURCE}' has no line '// first error: <regular expression>'")
endif()
string(REGEX REPLACE "^// first error: " "" _expect "${_expect}")
string(REPLACE "|" ";-I" _include_flags "-I${INCLUDES}")
execute_process(COMMAND ${COMPILER} -std=c++17 -fsyntax-only -fno-diagnostics-color ${_include_flags} ${SOURCE}
                RESULT_VARIABLE _status OUTPUT_VARIABLE _out ERROR_VARIABLE _out)
if(_status EQUAL 0)
  message(FATAL_ERROR "'${SOURCE}' compiled, expected a compile error matching '${_expect}'")
endif()
string(REGEX MATCH "[^\n]*error[^\n]*" _first "${_out}")
if(NOT _first MATCHES "${_expect}")
  message(FATAL_ERROR "the first error of '${SOURCE}' is\n  ${_first}\nexpected it to match\n  ${_expect}\n"
                      "full output:\n${_out}")
endif()
message(STATUS "refused as expected: ${_first}")
