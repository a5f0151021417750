// tests/fuzz/fuzz_spec.cpp: libFuzzer target for the JSON layer-stack spec reader
// (examples/tool/spec.hpp). Any input is refused with std::invalid_argument or std::domain_error
// (the header's contract; std::length_error is allowed as the library's size error;
// any other exception, e.g. one of nlohmann-json's own, escapes and is a finding), or
// parsed into a spec that builds its sections (stacks cut at recurrent cells, attention
// blocks checked and built), each stack with layers having a prediction, each attention
// block its planned score moment.
#include <cstddef>
#include <cstdint>
#include <stdexcept>
#include <string>

#include "../../examples/tool/spec.hpp"
#include <kindling/propagate/mean_field.hpp>

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  try {
    const kindling::network_spec spec = kindling::parse_network_spec(text, "fuzz input");
    const kindling::network_sections sections = kindling::build_sections(spec);
    for (const kindling::layer_stack& stack : sections.stacks) {
      if (!stack.empty()) (void)kindling::predict(stack);
    }
    for (const kindling::attention_block& block : sections.attention) (void)block.score_moment(1.0);
  } catch (const std::invalid_argument&) {
  } catch (const std::domain_error&) {
  } catch (const std::length_error&) {
  }
  return 0;
}
