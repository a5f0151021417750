// examples/tool/main.cpp: the `kindling` command line (CLI11): draw, check, plan,
// assemble, verify.
// Exit status 0 on success, 1 when a check fails, 2 on bad input; every error is one
// line on stderr.
#include <cstdio>
#include <exception>
#include <new>
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

// An integer option, taken by CLI11 as text and parsed by parse_integer (common.cpp),
// which refuses what CLI11 would wrap or clamp (-1, 2^64, '') with a message.
struct integer_option {
  std::string name;
  std::uint64_t min = 0, max = ~std::uint64_t{0};
  std::string text;
  CLI::Option* option = nullptr;
  std::optional<std::uint64_t> get() const {
    if (option->count() == 0) return std::nullopt;
    return parse_integer(name, text, min, max);
  }
};

void add(CLI::App* app, integer_option& m, const std::string& help) {
  m.option = app->add_option(m.name, m.text, help)->type_name("UINT");
}

// Limits of the integer options: a fan or a sparse count is used as a double, so at
// most 2^53; a thread count beyond 4096 is a typo, not a machine.
constexpr std::uint64_t max_exact_count = std::uint64_t{1} << 53;
constexpr std::uint64_t max_threads = 4096;

struct scheme_flags {
  maybe<double> gain, stddev, value;
  integer_option nonzero{"--nonzero", 1, max_exact_count, {}, nullptr};
  void attach(CLI::App* app) {
    add(app, gain, "--gain", "Gain of Glorot, He, LeCun (then sd = gain/sqrt(fan)), orthogonal, identity schemes");
    add(app, stddev, "--std", "Standard deviation of uniform, normal, truncated-normal, and sparse's nonzeros");
    add(app, value, "--value", "The value of the constant scheme");
    add(app, nonzero, "Nonzero incoming weights a unit for sparse (default 15)");
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
               "  plan   predict (and --measure) variance through a layer stack\n"
               "  assemble  write a whole model plan into one .safetensors or .npz file and its manifest\n"
               "  verify    check a checkpoint against a manifest exactly, tensor by tensor\n"
               "  audit     audit every tensor of a checkpoint against a plan or manifest, statistically",
               "kindling"};
  app.require_subcommand(1);

  draw_options draw;
  scheme_flags draw_flags;
  integer_option draw_fan_in{"--fan-in", 1, max_exact_count, {}, nullptr};
  integer_option draw_fan_out{"--fan-out", 1, max_exact_count, {}, nullptr};
  integer_option draw_seed{"--seed", 0, ~std::uint64_t{0}, {}, nullptr};
  integer_option draw_threads{"--threads", 1, max_threads, {}, nullptr};
  integer_option draw_blocks{"--blocks", 1, std::uint64_t{1} << 32, {}, nullptr};
  CLI::App* draw_cmd = app.add_subcommand("draw", "Write the values a scheme gives a parameter to a .npy file");
  draw_cmd->add_option("--scheme", draw.scheme.scheme,
                       "zeros, constant, uniform, normal, truncated-normal, glorot-uniform, glorot-normal, "
                       "he-uniform, he-normal, lecun-uniform, lecun-normal, orthogonal, identity, "
                       "delta-orthogonal, sparse")->required();
  draw_cmd->add_option("--shape", draw.shape, "Sizes joined by x, e.g. 512x256 (rank 1 to 5)")->required();
  draw_cmd->add_option("--layout", draw.layout,
                       "Axes: oi (default for rank 2), io; oiw/oihw/oidhw (default for rank 3-5), wio/hwio/dhwio, "
                       "owi/ohwi/odhwi; transposed: iow/iohw/iodhw, woi/hwoi/dhwoi");
  add(draw_cmd, draw_fan_in, "Override the fan-in the layout gives");
  add(draw_cmd, draw_fan_out, "Override the fan-out the layout gives");
  add(draw_cmd, draw_blocks,
      "A packed gate weight (GRU 3, LSTM 4): this many dense blocks stacked along the output axis of a rank-2 "
      "--shape, each drawn with its own fans and sub-stream, as a model plan's \"packed\" layer");
  draw_flags.attach(draw_cmd);
  add(draw_cmd, draw_seed, "Seed, 0 to 2^64 - 1 (default 0)");
  draw_cmd->add_option("--name", draw.name, "Parameter name, part of the stream (default 'weight')");
  draw_cmd->add_option("--dtype", draw.dtype, "f32 (default), f64, f16 or bf16");
  add(draw_cmd, draw_threads, "Threads (default 1; the values do not depend on it)");
  CLI::Option* draw_region =
      draw_cmd->add_option("--region", draw.region, "Write only this block, start:end per axis, e.g. 0:128,0:256");
  draw_cmd->add_option("-o,--output", draw.output, "Output .npy file")->required();

  check_options check;
  scheme_flags check_flags;
  integer_option check_fan_in{"--fan-in", 1, max_exact_count, {}, nullptr};
  integer_option check_fan_out{"--fan-out", 1, max_exact_count, {}, nullptr};
  integer_option check_blocks{"--blocks", 1, std::uint64_t{1} << 32, {}, nullptr};
  CLI::App* check_cmd = app.add_subcommand("check", "Audit a .npy weight file");
  check_cmd->add_option("FILE", check.file, "The .npy file")->required();
  check_cmd->add_option("--expect", check.expect.scheme, "Check conformance with this scheme (as draw --scheme)");
  check_cmd->add_option("--layout", check.layout, "Axes of the file, as for draw");
  check_cmd->add_option("--full-shape", check.full_shape,
                        "FILE is a block that draw --region wrote: the whole tensor's shape, which gives the fans");
  check_cmd->add_option("--region", check.region, "With --full-shape: where the block sits, as given to draw --region");
  add(check_cmd, check_fan_in, "Override the fan-in the layout gives");
  add(check_cmd, check_fan_out, "Override the fan-out the layout gives");
  add(check_cmd, check_blocks,
      "FILE is a packed gate weight of this many blocks (as draw --blocks): --expect checks each block with its own fans");
  check_flags.attach(check_cmd);
  check_cmd->add_flag("--identify", check.identify, "Rank the schemes the values fit, best first");
  check_cmd->add_option("--alpha", check.alpha,
                        "False-alarm rate of each report (symmetry, expect) on a correct tensor, in (0, 1); default 0.001");
  check_cmd->add_flag("--json", check.json, "Print the results as JSON");

  plan_options plan;
  integer_option plan_batch{"--batch", 1, std::uint64_t{1} << 32, {}, nullptr};
  integer_option plan_trials{"--trials", 2, 4096, {}, nullptr};
  integer_option plan_seed{"--seed", 0, ~std::uint64_t{0}, {}, nullptr};
  integer_option plan_threads{"--threads", 1, max_threads, {}, nullptr};
  CLI::App* plan_cmd = app.add_subcommand("plan", "Variance through depth for a layer stack (a JSON spec)");
  plan_cmd->add_option("SPEC", plan.spec, "Network spec .json (default: a built-in pump vibration classifier)");
  plan_cmd->add_flag("--measure", plan.measure, "Also measure over independent draws of the stack");
  add(plan_cmd, plan_batch, "Samples a draw for --measure, and for the recurrent cells and attention blocks, which are always measured "
                "(default 256; streamed through layer stacks, memory does not grow with it there)");
  add(plan_cmd, plan_trials, "Independent draws of the weights for --measure, cells and attention blocks (default 16)");
  add(plan_cmd, plan_seed, "Seed of the weights and inputs for --measure, 0 to 2^64 - 1 (default 0)");
  add(plan_cmd, plan_threads, "Threads for --measure (default 1)");
  plan_cmd->add_flag("--json", plan.json, "Print the table as JSON");
  plan_cmd->add_option("--svg", plan.svg, "Write the variance-through-depth plot to this SVG file");

  assemble_options assemble;
  integer_option assemble_seed{"--seed", 0, ~std::uint64_t{0}, {}, nullptr};
  CLI::App* assemble_cmd = app.add_subcommand("assemble", "Write a whole model plan into one .safetensors file and a manifest");
  assemble_cmd->add_option("PLAN", assemble.plan,
                           "Model plan .json (see kindling/io/manifest.hpp), or a manifest assemble wrote "
                           "(regenerates its checkpoint)")->required();
  add(assemble_cmd, assemble_seed, "Seed, 0 to 2^64 - 1 (default: the plan's \"seed\", else 0)");
  assemble_cmd->add_option("-o,--output", assemble.output, "Output .safetensors file")->required();
  assemble_cmd->add_option("--manifest", assemble.manifest, "Output manifest .json (default: OUTPUT.manifest.json)");
  assemble_cmd->add_flag("--compress", assemble.compress, "Deflate the .npz members (as np.savez_compressed); .npz only");
  integer_option assemble_threads{"--threads", 1, max_threads, {}, nullptr};
  add(assemble_cmd, assemble_threads, "Threads computing the values (default 1; the values do not depend on it)");

  verify_options verify;
  CLI::App* verify_cmd = app.add_subcommand("verify", "Check a .safetensors or .npz checkpoint against a manifest exactly");
  verify_cmd->add_option("FILE", verify.file, "The .safetensors or .npz file")->required();
  verify_cmd->add_option("--manifest", verify.manifest, "The manifest .json that assemble wrote")->required();

  audit_command_options audit;
  integer_option audit_threads{"--threads", 1, max_threads, {}, nullptr};
  CLI::App* audit_cmd = app.add_subcommand(
      "audit", "Audit every tensor of a .safetensors or .npz checkpoint against the scheme its plan or manifest names");
  audit_cmd->add_option("FILE", audit.file, "The .safetensors or .npz file")->required();
  audit_cmd->add_option("--plan", audit.plan, "The model plan .json the file was drawn from");
  audit_cmd->add_option("--manifest", audit.manifest, "Or the manifest .json that assemble wrote");
  audit_cmd->add_option("--alpha", audit.alpha,
                        "False-alarm rate of the whole audit on a correct file, in (0, 1); default 0.001, "
                        "split evenly over the statistical reports (Bonferroni)");
  audit_cmd->add_flag("--uncorrected", audit.uncorrected,
                      "Run each statistical report at --alpha itself (no Bonferroni correction)");
  audit_cmd->add_flag("--json", audit.json, "Print the results as JSON");
  add(audit_cmd, audit_threads, "Tensors audited at once (default 1)");

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    if (e.get_exit_code() == 0) return app.exit(e);  // --help
    std::fprintf(stderr, "kindling: error: %s (see kindling --help)\n", one_line(e.what()).c_str());
    return exit_bad_input;
  }
  const char* command = draw_cmd->parsed()       ? "draw"
                        : check_cmd->parsed()    ? "check"
                        : assemble_cmd->parsed() ? "assemble"
                        : verify_cmd->parsed()   ? "verify"
                        : audit_cmd->parsed()    ? "audit"
                                                 : "plan";
  try {
    if (assemble_cmd->parsed()) {
      assemble.seed = assemble_seed.get();
      assemble.threads = static_cast<std::size_t>(assemble_threads.get().value_or(assemble.threads));
      return run_assemble(assemble);
    }
    if (verify_cmd->parsed()) return run_verify(verify);
    if (audit_cmd->parsed()) {
      audit.threads = static_cast<std::size_t>(audit_threads.get().value_or(audit.threads));
      return run_audit(audit);
    }
    if (draw_cmd->parsed()) {
      draw_flags.into(draw.scheme);
      draw.fan_in = draw_fan_in.get();
      draw.fan_out = draw_fan_out.get();
      draw.blocks = draw_blocks.get();
      draw.seed = draw_seed.get().value_or(draw.seed);
      draw.threads = static_cast<std::size_t>(draw_threads.get().value_or(draw.threads));
      if (draw_region->count() && draw.region.empty()) {
        throw std::invalid_argument("--region '': expected start:end for each axis, e.g. 0:128,0:256 "
                                    "(leave --region out for the whole tensor)");
      }
      return run_draw(draw);
    }
    if (check_cmd->parsed()) {
      check_flags.into(check.expect);
      check.fan_in = check_fan_in.get();
      check.fan_out = check_fan_out.get();
      check.blocks = check_blocks.get();
      if (!(check.alpha > 0 && check.alpha < 1)) {
        throw std::invalid_argument("--alpha " + number_text(check.alpha, 6) +
                                    ": expected a false-alarm rate in (0, 1), e.g. 0.001");
      }
      if (check.expect.scheme.empty() && (check.expect.gain || check.expect.stddev || check.expect.value || check.expect.nonzero)) {
        throw std::invalid_argument("--gain, --std, --value and --nonzero describe the --expect scheme; give --expect");
      }
      return run_check(check);
    }
    plan.batch = plan_batch.get().value_or(plan.batch);
    plan.trials = static_cast<std::size_t>(plan_trials.get().value_or(plan.trials));
    plan.seed = plan_seed.get().value_or(plan.seed);
    plan.threads = static_cast<std::size_t>(plan_threads.get().value_or(plan.threads));
    return run_plan(plan);
  } catch (const std::bad_alloc&) {
    // The sizes were estimated before allocating; if memory still ran out, say which
    // options sized the work rather than only "std::bad_alloc".
    const std::string what =
        draw_cmd->parsed()    ? "for --shape " + draw.shape + (draw.region.empty() ? "" : " --region " + draw.region) +
                                 " --dtype " + draw.dtype + "; expected a smaller tensor, or write it in blocks with --region"
        : check_cmd->parsed() ? "reading FILE '" + check.file + "'; expected a smaller file, or more free memory"
        : assemble_cmd->parsed() ? "for PLAN '" + assemble.plan + "'; expected smaller parameters, or more free memory"
        : verify_cmd->parsed()   ? "reading --manifest '" + verify.manifest + "'; expected a smaller manifest"
        : audit_cmd->parsed()    ? "auditing FILE '" + audit.file + "'; expected smaller tensors, fewer --threads, or more free memory"
                              : "for SPEC '" + (plan.spec.empty() ? std::string("(built-in)") : plan.spec) +
                                   "'" + (plan.measure ? " with --batch " + std::to_string(plan.batch) : std::string()) +
                                   "; expected a smaller network" + (plan.measure ? " or --batch" : "");
    std::fprintf(stderr, "kindling %s: error: out of memory %s\n", command, one_line(what).c_str());
    return exit_bad_input;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "kindling %s: error: %s\n", command, one_line(e.what()).c_str());
    return exit_bad_input;
  }
}
