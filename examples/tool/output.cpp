// examples/tool/output.cpp: the tool's output files (see output.hpp).
#include "output.hpp"

#include <stdexcept>

#include <sys/stat.h>

#include <kindling/io/replace_file.hpp>

namespace kindling::tool {

void check_output(const std::string& option, const std::string& path, const std::vector<named_input>& inputs) {
  if (path.empty()) throw std::invalid_argument(option + " '': expected a file name");
  (void)check_replaceable(path, option);
  // The same file under another name (or through a link) is caught by its identity.
  struct stat out;
  if (::stat(path.c_str(), &out) != 0) return;  // a new file is no input
  for (const auto& [input_option, input_path] : inputs) {
    struct stat in;
    if (!input_path.empty() && ::stat(input_path.c_str(), &in) == 0 && in.st_dev == out.st_dev &&
        in.st_ino == out.st_ino) {
      throw std::invalid_argument(option + " '" + path + "' is the input " + input_option + " '" + input_path +
                                  "'; expected a different file, so the input is not overwritten");
    }
  }
}

void write_output(const std::string& option, const std::string& path, const std::string& bytes) {
  replace_file(path, bytes, option);
}

}  // namespace kindling::tool
