// examples/tool/output.hpp: how the commands write their output files (-o, --svg).
// Every output goes through kindling::replace_file (kindling/io/replace_file.hpp): an
// exclusive temporary file beside the target, fsync, atomic rename; a symbolic link is
// written through to its target (the link stays); directories, devices, FIFOs and
// read-only files are refused; so is an output that is one of the run's input files.
// Outputs are checked before any work is done (validate first, then write) and again
// when written.
#ifndef KINDLING_TOOL_OUTPUT_HPP
#define KINDLING_TOOL_OUTPUT_HPP

#include <string>
#include <utility>
#include <vector>

namespace kindling::tool {

/// An input file of the run and the option (or argument) that named it, e.g. {"SPEC", "net.json"}.
using named_input = std::pair<std::string, std::string>;

/// Refuses (std::invalid_argument naming `option`, the path and the reason) an output
/// the run could not or must not write: see the top of this header.
void check_output(const std::string& option, const std::string& path, const std::vector<named_input>& inputs);

/// Writes `bytes` to the output `path` given by `option`.
void write_output(const std::string& option, const std::string& path, const std::string& bytes);

}  // namespace kindling::tool

#endif  // KINDLING_TOOL_OUTPUT_HPP
