// examples/tool/plan.cpp: `kindling plan` prints how a layer stack's initialization
// carries the signal through depth: per layer, the mean-field prediction of the
// pre-activation variance (forward) and of the variance of the gradient with respect
// to the pre-activation (backward), and with --measure the same measured over --trials
// independent draws of the stack, --batch samples each, with the library's verdict
// (kindling/propagate/measure.hpp): the columns and sentences are those of
// propagation_report::table(). --json for scripts, --svg for a picture.
#include <atomic>
#include <cmath>
#include <cstdio>
#include <functional>
#include <mutex>
#include <stdexcept>
#include <string>
#include <vector>

#include <unistd.h>

#include <nlohmann/json.hpp>

#include <kindling/io/npy.hpp>
#include <kindling/propagate/mean_field.hpp>
#include <kindling/propagate/measure.hpp>

#include "output.hpp"
#include "plot.hpp"
#include "spec.hpp"
#include "tool.hpp"

namespace kindling::tool {

namespace {

using json = nlohmann::json;

// The built-in network: a classifier of a pump's state (healthy, cavitation, bearing
// wear, misalignment) from 64 spectral bands of its accelerometer signal. Its middle
// tanh layers use Glorot's rule without the tanh gain, so the plan shows the variance
// fading through them -- what the tool is for.
const char* const pump_classifier = R"json({
  "name": "pump vibration classifier (built-in example)",
  "input": {"width": 64, "variance": 1.0},
  "layers": [
    {"width": 256, "activation": "relu", "scheme": "he-normal", "label": "bands"},
    {"width": 256, "activation": "relu", "scheme": "he-normal", "label": "mix1"},
    {"width": 128, "activation": "tanh", "scheme": "glorot-uniform", "label": "mix2"},
    {"width": 128, "activation": "tanh", "scheme": "glorot-uniform", "label": "mix3"},
    {"width": 128, "activation": "tanh", "scheme": "glorot-uniform", "label": "mix4"},
    {"width": 128, "activation": "tanh", "scheme": "glorot-uniform", "label": "mix5"},
    {"width": 64, "activation": "tanh", "scheme": "glorot-normal", "gain": 1.6666666666666667, "label": "summary"},
    {"width": 4, "activation": "identity", "scheme": "glorot-uniform", "label": "state"}
  ]
})json";

// An executor that reports finished tasks on stderr, for a terminal only.
struct progress_executor {
  thread_executor inner;
  bool show;
  void operator()(std::size_t n, const std::function<void(std::size_t)>& task) const {
    if (!show) return inner(n, task);
    std::atomic<std::size_t> done{0};
    std::mutex print;
    inner(n, [&](std::size_t k) {
      task(k);
      const std::size_t d = ++done;
      std::lock_guard<std::mutex> lock(print);
      std::fprintf(stderr, "\rkindling plan: measuring, %zu/%zu draws", d, n);
      std::fflush(stderr);
    });
    std::fprintf(stderr, "\r\033[K");
    std::fflush(stderr);
  }
};

std::string std_text(double variance) { return number_text(std::sqrt(variance), 4); }

// --measure holds the weights and, for a batch, each layer's activations forward and
// gradients backward (doubles); refused above the tool's memory cap before anything is
// drawn, naming --batch and the spec's widths.
void check_measure_memory(const layer_stack& stack, std::uint64_t batch) {
  // units: every value a sample has at each layer (channels x positions on a map)
  double weights = 0, units = static_cast<double>(stack.input_units());
  for (const stack_layer& l : stack.layers()) {
    weights += static_cast<double>(l.width) * static_cast<double>(kindling::detail::weight_columns(l));
    units += static_cast<double>(l.units());
  }
  const double peak = 8.0 * (weights + 2.0 * static_cast<double>(batch) * units);
  if (peak > static_cast<double>(memory_budget)) {
    throw std::length_error("--batch " + std::to_string(batch) + " with --measure needs about " + bytes_text(peak) +
                            " of memory for the spec's " + number_text(units, 6) + " units and " +
                            number_text(weights, 6) + " weights; expected at most " +
                            bytes_text(static_cast<double>(memory_budget)) +
                            " (the tool's memory cap): give a smaller --batch");
  }
}

// The SVG of --svg: predicted (and measured) variances per layer, warned layers marked.
void write_plan_svg(const network_spec& spec, const plan_options& o, const layer_stack& stack,
                    const std::vector<layer_prediction>& predicted, const propagation_report& measured,
                    std::vector<plot_series> series) {
  if (!o.measure) series.resize(2);
  const std::string title = spec.name.empty() ? o.spec : spec.name;
  const std::string subtitle = "mean-field prediction" +
                               (o.measure ? std::string(" and the median of ") + std::to_string(o.trials) +
                                                " draws of the weights, " + std::to_string(o.batch) +
                                                " samples each (seed " + std::to_string(o.seed) + ")"
                                          : std::string(" (add --measure for measured points)"));
  std::vector<std::string> names;
  std::vector<bool> warned;
  for (std::size_t l = 0; l < stack.depth(); ++l) {
    names.push_back(stack[l].label);
    warned.push_back(!predicted[l].warnings.empty() || (o.measure && !measured.layers[l].agrees));
  }
  write_output("--svg", o.svg, variance_plot_svg(title, subtitle, series, stack.depth(), names, warned));
}

// The text table of `kindling plan` (without --json): one line a layer, then the
// method of the measurement and the warnings.
void print_plan_table(const network_spec& spec, const plan_options& o, const layer_stack& stack,
                      const std::vector<layer_prediction>& predicted, const propagation_report& measured,
                      const json& warnings) {
  std::string extent;  // a feature map: its channels over the extent
  for (std::size_t d = 0; d < spec.input_extent.size(); ++d) extent += (d ? " x " : "") + std::to_string(spec.input_extent[d]);
  std::printf("%s: input %llu %s, E[x^2] = %s\n", spec.name.empty() ? o.spec.c_str() : spec.name.c_str(),
              static_cast<unsigned long long>(spec.input_width),
              extent.empty() ? "features" : ("channels over " + extent + " positions").c_str(),
              number_text(spec.input_variance).c_str());
  std::printf("%-3s %-9s %6s %7s %-10s %-14s %9s %11s %11s", "#", "layer", "fan_in", "fan_out", "activation",
              "scheme", "weight_sd", "fwd_var", "bwd_var");
  if (o.measure) std::printf(" %11s %7s %11s %7s  %s", "fwd_med", "x/", "bwd_med", "x/", "agrees");
  std::printf("\n");
  for (std::size_t l = 0; l < stack.depth(); ++l) {
    const stack_layer& L = stack[l];
    const layer_prediction& p = predicted[l];
    std::printf("%-3zu %-9s %6llu %7llu %-10s %-14s %9s %11s %11s", l + 1, L.label.c_str(),
                static_cast<unsigned long long>(L.fans.fan_in), static_cast<unsigned long long>(L.fans.fan_out),
                std::string(L.act.name()).c_str(), L.scheme.c_str(), std_text(L.weight_variance).c_str(),
                number_text(p.preactivation_variance).c_str(), number_text(p.gradient_variance).c_str());
    if (o.measure) {
      const layer_comparison& c = measured.layers[l];
      std::printf(" %11s %7s %11s %7s  %s", number_text(c.preactivation.median).c_str(),
                  number_text(std::exp(c.preactivation.spread), 3).c_str(), number_text(c.gradient.median).c_str(),
                  number_text(std::exp(c.gradient.spread), 3).c_str(), c.agrees ? "yes" : "NO");
    }
    std::printf("\n");
  }
  if (o.measure) std::printf("%s\n", measured.method().c_str());
  for (const auto& w : warnings) std::printf("warning: %s\n", w.get<std::string>().c_str());
  if (!o.svg.empty()) std::printf("wrote %s\n", o.svg.c_str());
}

}  // namespace

int run_plan(const plan_options& o) {
  const network_spec spec =
      o.spec.empty() ? parse_network_spec(pump_classifier, "(built-in)") : read_network_spec(o.spec, "SPEC");
  if (o.threads == 0) throw std::invalid_argument("--threads 0: expected at least 1 thread");
  if (o.measure && o.batch < 1) {
    throw std::invalid_argument("--batch " + std::to_string(o.batch) + ": expected at least 1 sample a draw");
  }
  if (o.measure && o.trials < 2) {
    throw std::invalid_argument("--trials " + std::to_string(o.trials) + ": expected at least 2 draws");
  }
  const layer_stack stack = build_stack(spec);
  if (o.measure) check_measure_memory(stack, o.batch);
  if (!o.svg.empty()) check_output("--svg", o.svg, {{"SPEC", o.spec}});
  const std::vector<layer_prediction> predicted = predict(stack);
  propagation_report measured;
  if (o.measure) {
    const bool tty = isatty(STDERR_FILENO) != 0;
    measure_options mo;
    mo.trials = o.trials;
    // Each draw streams the batch in slices of 32 samples: memory does not grow with
    // --batch (no batch x batch matrix), only the time does.
    measured = compare_propagation(stack, predicted, o.batch, make_stream(o.seed, "kindling.plan"), mo,
                                   progress_executor{thread_executor(o.threads), tty});
  }
  bool agrees = true;
  json layers = json::array();
  json warnings = json::array();
  std::vector<plot_series> series(4);
  series[0] = {"forward (pre-activation), predicted", "#1f5fa8", true, {}};
  series[1] = {"backward (gradient), predicted", "#c8501e", true, {}};
  series[2] = {"forward, measured", "#1f5fa8", false, {}};
  series[3] = {"backward, measured", "#c8501e", false, {}};
  for (std::size_t l = 0; l < stack.depth(); ++l) {
    const stack_layer& L = stack[l];
    const layer_prediction& p = predicted[l];
    json row = {{"index", l + 1},
                {"label", L.label},
                {"fan_in", L.fans.fan_in},
                {"fan_out", L.fans.fan_out},
                {"scheme", L.scheme},
                {"activation", L.act.name()},
                {"weight_std", std::sqrt(L.weight_variance)},
                {"forward_variance", p.preactivation_variance},
                {"backward_variance", p.gradient_variance},
                {"measured_forward_variance", nullptr},
                {"measured_backward_variance", nullptr}};
    const double x = static_cast<double>(l + 1);
    series[0].points.push_back({x, p.preactivation_variance});
    series[1].points.push_back({x, p.gradient_variance});
    for (const std::string& w : p.warnings) warnings.push_back("layer " + std::to_string(l + 1) + " (" + L.label + "): " + w);
    if (o.measure) {
      const layer_comparison& c = measured.layers[l];
      const auto moment = [](const measured_moment& m) {
        return json{{"median", m.median},
                    {"spread_factor", std::exp(m.spread)},  // the table's x/: one draw varies by x/ this
                    {"mean_over_predicted", std::exp(m.deviation)},
                    {"band_factor", std::exp(m.tolerance)},  // agrees when mean/predicted is within x/ this
                    {"agrees", m.agrees},
                    {"draws", m.draws}};
      };
      row["measured_forward_variance"] = c.preactivation.median;
      row["measured_backward_variance"] = c.gradient.median;
      row["measured_forward"] = moment(c.preactivation);
      row["measured_backward"] = moment(c.gradient);
      row["agrees"] = c.agrees;
      series[2].points.push_back({x, c.preactivation.median});
      series[3].points.push_back({x, c.gradient.median});
      if (!c.agrees) {
        agrees = false;
        warnings.push_back("layer " + std::to_string(l + 1) + " (" + L.label + "): disagrees: " + measured.disagreement(l));
      }
    }
    layers.push_back(row);
  }
  if (!o.svg.empty()) write_plan_svg(spec, o, stack, predicted, measured, series);
  if (o.json) {
    json out = {{"layers", layers}, {"warnings", warnings}};
    if (!spec.name.empty()) out["name"] = spec.name;
    if (o.measure) {
      out["batch"] = o.batch;
      out["trials"] = o.trials;
      out["false_alarm"] = measured.false_alarm;
      out["method"] = measured.method();
    }
    std::printf("%s\n", out.dump(2).c_str());
  } else {
    print_plan_table(spec, o, stack, predicted, measured, warnings);
  }
  return agrees ? exit_ok : exit_check_failed;
}

}  // namespace kindling::tool
