# The `kindling` tool run from outside (tests/tool/check_tool.py, with Debian's
# /usr/bin/python3 and python3-numpy): exit codes and one-line errors, an existing
# output file untouched by a failed run, --region against the whole tensor, NumPy
# reading our .npy files (and we NumPy's), and the JSON and SVG outputs.
# The doctest binary (spec.cpp, spec_kinds.cpp) needs nlohmann-json for spec.hpp.
if(TARGET kindling_test_tool)
  find_package(nlohmann_json CONFIG REQUIRED)
  target_link_libraries(kindling_test_tool PRIVATE nlohmann_json::nlohmann_json)
endif()
if(KINDLING_BUILD_EXAMPLES)
  foreach(_kindling_tool_case
          "exit-codes;exit codes 0, 1 and 2 with one-line errors for every command"
          "untouched;an existing output file is never replaced by a failed run"
          "region;--region writes exactly that block of the whole tensor, whatever the threads, and check --full-shape takes its fans"
          "packed;draw --blocks equals the library's packed layer byte for byte, check --blocks checks each gate block with its own fans"
          "rate-packed;rate: check --blocks false-alarm rate over 200 seeds within alpha, and every draw with the whole tensor's fans caught"
          "numpy;numpy.load reads every element type and the values match, and numpy's files read back"
          "json;check --identify --json ranks candidates best first, plan --json and --svg"
          "outputs;outputs go through an exclusive temporary file and a rename, links written through, odd files refused"
          "numbers;integer options refuse negatives, overflow, empty text and junk, and values that do not fit"
          "limits;inputs are read within a size limit and memory is estimated before it is allocated"
          "messages;errors name the user's option or key, and SVG text is escaped"
          "rate-4096;rate: correct 4096x4096 draws pass kindling check in every dtype, a fan off by 1.1 fails"
          "batch;plan --measure --batch 30000 streams the batch in bounded memory (no batch x batch matrix)")
    list(GET _kindling_tool_case 0 _case)
    list(GET _kindling_tool_case 1 _what)
    add_test(NAME "tool: ${_what}"
             COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/tool/check_tool.py
                     $<TARGET_FILE:kindling_tool> ${_case} ${CMAKE_CURRENT_BINARY_DIR}/tool_${_case})
  endforeach()
endif()
# Whole models (tests/tool/check_models.py, /usr/bin/python3 with numpy, json, struct,
# zipfile): `kindling assemble` of examples/models/conveyor_belt.json (and the same plan
# written with rules) read with np.frombuffer and np.load (.npz, stored and deflated),
# files written by the script and by np.savez verified and audited, a flipped byte and
# a wrong fan caught, damaged archives refused, --threads and the progress line.
if(KINDLING_BUILD_EXAMPLES)
  add_test(NAME "tool: assemble, verify and audit a whole model (safetensors and npz), checked with numpy"
           COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/tool/check_models.py
                   $<TARGET_FILE:kindling_tool> ${PROJECT_SOURCE_DIR} ${CMAKE_CURRENT_BINARY_DIR}/tool_models)
endif()
# The pump model (examples/models/pump.json: convolutions, a GRU with packed gates, a dense
# head) through the same script: assembled into safetensors and npz with a manifest, read
# by NumPy, each tensor equal to `kindling draw` of it, audited, regenerated from the
# manifest bit for bit, and a flipped byte in any tensor caught by name.
if(KINDLING_BUILD_EXAMPLES)
  add_test(NAME "tool: the pump model assembled, read by numpy, audited, regenerated from its manifest, a flipped byte named"
           COMMAND /usr/bin/python3 ${CMAKE_CURRENT_SOURCE_DIR}/tool/check_models.py
                   $<TARGET_FILE:kindling_tool> ${PROJECT_SOURCE_DIR} ${CMAKE_CURRENT_BINARY_DIR}/tool_pump pump)
endif()
