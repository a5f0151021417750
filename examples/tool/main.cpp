// examples/tool/main.cpp: the `kindling` command line (CLI11): draw, check, plan.
// Exit status 0 on success, 1 when a check fails, 2 on bad input; every error is one
// line on stderr.
#include <cstdio>
#include <exception>
#include <stdexcept>
#include <string>

#include <CLI/CLI.hpp>

#include "tool.hpp"

namespace {

using namespace kindling::tool;

std::string one_line(std::string s) {
  for (char& c : s) {
    if (c == '\n' || c == '\r') c = ' ';
  }
  while (!s.empty() && s.back() == ' ') s.pop_back();
  return s;
}

// Options whose presence matters (an optional value), bound to a plain variable.
template <class T>
struct maybe {
  T value{};
  CLI::Option* option = nullptr;
  std::optional<T> get() const { return option->count() ? std::optional<T>(value) : std::nullopt; }
};

template <class T>
void add(CLI::App* app, maybe<T>& m, const std::string& name, const std::string& help) {
  m.option = app->add_option(name, m.value, help);
}

struct scheme_flags {
  maybe<double> gain, stddev, value;
  maybe<std::uint64_t> nonzero;
  void attach(CLI::App* app) {
    add(app, gain, "--gain", "Gain of Glorot, He, LeCun (then sd = gain/sqrt(fan)), orthogonal, identity schemes");
    add(app, stddev, "--std", "Standard deviation of uniform, normal, truncated-normal, and sparse's nonzeros");
    add(app, value, "--value", "The value of the constant scheme");
    add(app, nonzero, "--nonzero", "Nonzero incoming weights a unit for sparse (default 15)");
  }
  void into(scheme_arguments& a) const {
    a.gain = gain.get();
    a.stddev = stddev.get();
    a.value = value.get();
    a.nonzero = nonzero.get();
  }
};

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"kindling: reproducible initialization of neural-network parameters.\n"
               "  draw   write a scheme's values for a parameter to a .npy file\n"
               "  check  audit a .npy weight file (symmetry, --expect, --identify)\n"
               "  plan   predict (and --measure) variance through a layer stack",
               "kindling"};
  app.require_subcommand(1);

  draw_options draw;
  scheme_flags draw_flags;
  maybe<std::uint64_t> draw_fan_in, draw_fan_out;
  CLI::App* draw_cmd = app.add_subcommand("draw", "Write the values a scheme gives a parameter to a .npy file");
  draw_cmd->add_option("--scheme", draw.scheme.scheme,
                       "zeros, constant, uniform, normal, truncated-normal, glorot-uniform, glorot-normal, "
                       "he-uniform, he-normal, lecun-uniform, lecun-normal, orthogonal, identity, "
                       "delta-orthogonal, sparse")->required();
  draw_cmd->add_option("--shape", draw.shape, "Sizes joined by x, e.g. 512x256 (rank 1 to 5)")->required();
  draw_cmd->add_option("--layout", draw.layout,
                       "Axes: oi (default for rank 2), io; oiw/oihw/oidhw (default for rank 3-5), wio/hwio/dhwio, "
                       "owi/ohwi/odhwi; transposed: iow/iohw/iodhw, woi/hwoi/dhwoi");
  add(draw_cmd, draw_fan_in, "--fan-in", "Override the fan-in the layout gives");
  add(draw_cmd, draw_fan_out, "--fan-out", "Override the fan-out the layout gives");
  draw_flags.attach(draw_cmd);
  draw_cmd->add_option("--seed", draw.seed, "Seed (default 0)");
  draw_cmd->add_option("--name", draw.name, "Parameter name, part of the stream (default 'weight')");
  draw_cmd->add_option("--dtype", draw.dtype, "f32 (default), f64, f16 or bf16");
  draw_cmd->add_option("--threads", draw.threads, "Threads (default 1; the values do not depend on it)");
  draw_cmd->add_option("--region", draw.region, "Write only this block, start:end per axis, e.g. 0:128,0:256");
  draw_cmd->add_option("-o,--output", draw.output, "Output .npy file")->required();

  check_options check;
  scheme_flags check_flags;
  maybe<std::uint64_t> check_fan_in, check_fan_out;
  CLI::App* check_cmd = app.add_subcommand("check", "Audit a .npy weight file");
  check_cmd->add_option("FILE", check.file, "The .npy file")->required();
  check_cmd->add_option("--expect", check.expect.scheme, "Check conformance with this scheme (as draw --scheme)");
  check_cmd->add_option("--layout", check.layout, "Axes of the file, as for draw");
  add(check_cmd, check_fan_in, "--fan-in", "Override the fan-in the layout gives");
  add(check_cmd, check_fan_out, "--fan-out", "Override the fan-out the layout gives");
  check_flags.attach(check_cmd);
  check_cmd->add_flag("--identify", check.identify, "Rank the schemes the values fit, best first");
  check_cmd->add_flag("--json", check.json, "Print the results as JSON");

  plan_options plan;
  CLI::App* plan_cmd = app.add_subcommand("plan", "Variance through depth for a layer stack (a JSON spec)");
  plan_cmd->add_option("SPEC", plan.spec, "Network spec .json (default: a built-in pump vibration classifier)");
  plan_cmd->add_flag("--measure", plan.measure, "Also measure over independent draws of the stack");
  plan_cmd->add_option("--batch", plan.batch, "Samples a draw for --measure (default 256; streamed, memory does not grow with it)");
  plan_cmd->add_option("--trials", plan.trials, "Independent draws of the weights for --measure (default 16)");
  plan_cmd->add_option("--seed", plan.seed, "Seed of the weights and inputs for --measure (default 0)");
  plan_cmd->add_option("--threads", plan.threads, "Threads for --measure (default 1)");
  plan_cmd->add_flag("--json", plan.json, "Print the table as JSON");
  plan_cmd->add_option("--svg", plan.svg, "Write the variance-through-depth plot to this SVG file");

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    if (e.get_exit_code() == 0) return app.exit(e);  // --help
    std::fprintf(stderr, "kindling: error: %s (see kindling --help)\n", one_line(e.what()).c_str());
    return exit_bad_input;
  }
  const char* command = draw_cmd->parsed() ? "draw" : check_cmd->parsed() ? "check" : "plan";
  try {
    if (draw_cmd->parsed()) {
      draw_flags.into(draw.scheme);
      draw.fan_in = draw_fan_in.get();
      draw.fan_out = draw_fan_out.get();
      return run_draw(draw);
    }
    if (check_cmd->parsed()) {
      check_flags.into(check.expect);
      check.fan_in = check_fan_in.get();
      check.fan_out = check_fan_out.get();
      if (check.expect.scheme.empty() && (check.expect.gain || check.expect.stddev || check.expect.value || check.expect.nonzero)) {
        throw std::invalid_argument("--gain, --std, --value and --nonzero describe the --expect scheme; give --expect");
      }
      return run_check(check);
    }
    return run_plan(plan);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "kindling %s: error: %s\n", command, one_line(e.what()).c_str());
    return exit_bad_input;
  }
}
