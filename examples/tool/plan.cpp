// examples/tool/plan.cpp: `kindling plan` prints how a layer stack's initialization
// carries the signal through depth: per layer, the mean-field prediction of the
// pre-activation variance (forward) and of the variance of the gradient with respect
// to the pre-activation (backward), and with --measure the same measured over --trials
// independent draws of the stack, --batch samples each, with the library's verdict
// (kindling/propagate/measure.hpp). Recurrent cells and attention blocks in the spec
// are always measured (neither has a closed form) and cut the stack into sections.
// The verdicts and warnings are the library's; the table adds each layer's fans,
// activation and scheme. --json for scripts, --svg for a picture.
#include <algorithm>
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
#include <kindling/propagate/attention.hpp>
#include <kindling/propagate/recurrent.hpp>

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

// A cell keeps, for a batch, its gates, states and inputs at every step (doubles); the
// executor runs up to `threads` draws at once.
void check_cell_memory(const recurrent_cell& c, std::uint64_t batch, std::size_t threads) {
  const double steps = static_cast<double>(c.steps()), h = static_cast<double>(c.hidden());
  const double per_sample = steps * (static_cast<double>(c.gates()) * h + 4.0 * h + static_cast<double>(c.input_width()));
  const double weights = static_cast<double>(c.gates()) * h * (h + static_cast<double>(c.input_width()));
  const double peak = 8.0 * (weights + static_cast<double>(batch) * per_sample) * static_cast<double>(threads);
  if (peak > static_cast<double>(memory_budget)) {
    throw std::length_error("--batch " + std::to_string(batch) + " needs about " + bytes_text(peak) +
                            " of memory for the recurrent cell '" + c.label() + "' over " + std::to_string(c.steps()) +
                            " steps; expected at most " + bytes_text(static_cast<double>(memory_budget)) +
                            " (the tool's memory cap): give a smaller --batch");
  }
}

// An attention draw keeps its four [d, d] weights and, for `batch` sequences of L
// tokens, the input, queries, keys, values, mix and output and the gradients of the
// backward pass (loss, mix, queries, keys, values, input; d x L batch each, doubles),
// and one head's scores, softmax weights and their gradients (L x L); up to `threads`
// draws at once.
void check_attention_memory(const attention_block& a, std::uint64_t batch, std::size_t threads) {
  const double d = static_cast<double>(a.width()), l = static_cast<double>(a.length());
  const double peak = 8.0 * (4.0 * d * d + 13.0 * d * l * static_cast<double>(batch) + 6.0 * l * l) *
                      static_cast<double>(threads);
  if (peak > static_cast<double>(memory_budget)) {
    throw std::length_error("--batch " + std::to_string(batch) + " needs about " + bytes_text(peak) +
                            " of memory for the attention block '" + a.label() + "' (width " +
                            std::to_string(a.width()) + ", " + std::to_string(a.length()) +
                            " tokens); expected at most " + bytes_text(static_cast<double>(memory_budget)) +
                            " (the tool's memory cap): give a smaller --batch");
  }
}

// The options against the spec's sections, before any work: counts, the memory a
// measured pass would take, and the --svg path.
void check_plan_options(const plan_options& o, const network_sections& sections) {
  if (o.threads == 0) throw std::invalid_argument("--threads 0: expected at least 1 thread");
  if (o.measure && o.batch < 1) {
    throw std::invalid_argument("--batch " + std::to_string(o.batch) + ": expected at least 1 sample a draw");
  }
  if (o.measure && o.trials < 2) {
    throw std::invalid_argument("--trials " + std::to_string(o.trials) + ": expected at least 2 draws");
  }
  if (!sections.cuts.empty() && (o.batch < 1 || o.trials < 2)) {
    throw std::invalid_argument("--batch " + std::to_string(o.batch) + " --trials " + std::to_string(o.trials) +
                                ": expected at least 1 sample and 2 draws (a recurrent cell's state and an attention "
                                "block's output are measured)");
  }
  for (const layer_stack& stack : sections.stacks) {
    if (o.measure && !stack.empty()) check_measure_memory(stack, o.batch);
  }
  const std::size_t concurrent = std::max<std::size_t>(1, std::min(o.threads, o.trials));
  for (const recurrent_cell& c : sections.cells) check_cell_memory(c, o.batch, concurrent);
  for (const attention_block& a : sections.attention) check_attention_memory(a, o.batch, concurrent);
  if (!o.svg.empty()) check_output("--svg", o.svg, {{"SPEC", o.spec}});
}

// The table being built: one entry a row in each of its forms (JSON, text, SVG).
struct plan_rows {
  json layers = json::array();
  json warnings = json::array();
  std::vector<plot_series> series;
  std::vector<std::string> names, lines;
  std::vector<bool> warned;
  bool agrees = true;
  std::size_t index = 0;
  int label_width = 9;  // the layer column (detail::table_label_width)
};

// An attention block's rows (propagate/attention.hpp): its four projections, the scaled
// scores, the softmax weights (their concentration E[sum_j p_ij^2]; measured only), the
// mix and the output, forward and backward (the gradient with respect to each, from the
// block's own unit loss gradient).  fwd_var/bwd_var are the predictions from the schemes
// where there is one; each judged verdict compares the draws with the prediction given
// each draw (compare_attention), so rows without a prediction from the schemes alone
// (forward mix and output, backward value) are judged too.
void add_attention_rows(const attention_block& a, const attention_report& r, double input_moment, bool measure,
                        plan_rows& t) {
  for (const attention_row& row : r.rows) {
    ++t.index;
    const std::string label = a.label() + "." + row.name;
    const detail::table_cells cells = detail::attention_cells(row, label);
    const json fan_in = row.projection ? json(row.width) : json(nullptr), fan_out = fan_in;
    const bool planned = !std::isnan(row.planned);
    const bool planned_gradient = !std::isnan(row.planned_gradient);
    std::vector<std::string> measured_only;
    if (!row.judged) measured_only.push_back("measured_forward_variance");
    if (!row.gradient_judged) measured_only.push_back("measured_backward_variance");
    json j = {{"index", t.index},
              {"label", label},
              {"kind", "attention"},
              {"block", a.label()},
              {"part", row.name},
              {"heads", a.heads()},
              {"tokens", a.length()},
              {"fan_in", fan_in},
              {"fan_out", fan_out},
              {"scheme", cells.scheme},
              {"activation", cells.activation},
              {"weight_std", row.projection ? json(std::sqrt(row.weight_variance)) : json(nullptr)},
              {"input_variance", input_moment},
              {"forward_variance", planned ? json(row.planned) : json(nullptr)},
              {"backward_variance", planned_gradient ? json(row.planned_gradient) : json(nullptr)},
              {"measured_forward_variance", row.median},
              {"measured_backward_variance", row.gradient_median},
              {"measured_only", measured_only}};
    // A judged direction: the draws and the verdict, its mean ratio given each draw.
    const auto judged = [](double median, double spread, const measured_moment& v, const std::vector<double>& d) {
      return json{{"median", median},
                  {"spread_factor", std::exp(spread)},
                  {"mean_over_predicted", std::exp(v.deviation)},
                  {"band_factor", std::exp(v.tolerance)},
                  {"agrees", v.agrees},
                  {"draws", d}};
    };
    if (row.judged) j["measured_forward"] = judged(row.median, row.spread, row.verdict, row.draws);
    if (row.gradient_judged) {
      j["measured_backward"] = judged(row.gradient_median, row.gradient_spread, row.gradient_verdict, row.gradient_draws);
    }
    if (row.judged || row.gradient_judged) j["agrees"] = row.agrees();
    t.layers.push_back(j);
    const double x = static_cast<double>(t.index);
    if (planned) t.series[0].points.push_back({x, row.planned});
    if (planned_gradient) t.series[1].points.push_back({x, row.planned_gradient});
    if (measure) {
      t.series[2].points.push_back({x, row.median});
      t.series[3].points.push_back({x, row.gradient_median});
    }
    std::string text = detail::table_line(t.index, cells, t.label_width, measure);
    const bool bad = !row.agrees();
    const auto warn = [&](const char* direction, const measured_moment& v) {
      t.warnings.push_back("layer " + std::to_string(t.index) + " (" + label + "): disagrees " + direction +
                           ": mean/predicted = " + number_text(std::exp(v.deviation)) +
                           " given the draw, outside the band x/" + number_text(std::exp(v.tolerance)));
    };
    if (row.judged && !row.verdict.agrees) warn("forward", row.verdict);
    if (row.gradient_judged && !row.gradient_verdict.agrees) warn("backward", row.gradient_verdict);
    if (bad && measure) t.agrees = false;
    if (row.name == "output") {
      char info[768];
      std::snprintf(info, sizeof info,
                    "\n    attention: %llu heads of %llu features over %llu tokens, fed E[x^2] = %s; measured only: "
                    "softmax E[sum p^2] = %s (uniform attention: %s), output E[y^2] = %s (fed to the layers above), "
                    "input gradient E[(dL/dx)^2] = %s",
                    static_cast<unsigned long long>(a.heads()), static_cast<unsigned long long>(a.head_width()),
                    static_cast<unsigned long long>(a.length()), number_text(input_moment).c_str(),
                    number_text(r.row("softmax").median).c_str(), number_text(1.0 / static_cast<double>(a.length())).c_str(),
                    number_text(row.median).c_str(), number_text(r.input_gradient()).c_str());
      text += info;
    }
    t.lines.push_back(text);
    t.names.push_back(label);
    t.warned.push_back(bad);
  }
}

// The label of cut k, for the stream of the stack above it.
const std::string& cut_label(const network_sections& sections, std::size_t k) {
  const network_sections::cut& c = sections.cuts[k];
  return c.attention ? sections.attention[c.index].label() : sections.cells[c.index].label();
}

}  // namespace

// How one measured stack between cuts (rows first..last) was judged: each such stack
// has its own false-alarm budget.
struct judged_part {
  std::size_t first, last;
  std::string method;
};

// The lines under the table: one stack's method as the library words it; with cuts,
// each stack's method (its budget worded for its rows) under its rows and the budgets of every judged part (stacks,
// cells, blocks) summed for the whole table (Bonferroni).
std::vector<std::string> method_lines(const std::vector<judged_part>& parts, std::size_t cells, std::size_t blocks) {
  if (parts.empty()) return {};
  if (parts.size() + cells + blocks < 2) return {parts[0].method};
  std::vector<std::string> out;
  for (const judged_part& p : parts) {
    out.push_back("rows " + std::to_string(p.first) + (p.last > p.first ? "-" + std::to_string(p.last) : "") + ": " +
                  p.method);
  }
  const double sum = measure_options{}.false_alarm * static_cast<double>(parts.size()) +
                     recurrent_options{}.false_alarm * static_cast<double>(cells) +
                     attention_options{}.false_alarm * static_cast<double>(blocks);
  out.push_back("the whole table: false alarm <= " + number_text(sum) + ", the sum over its " +
                std::to_string(parts.size() + cells + blocks) + " judged parts");
  return out;
}

int run_plan(const plan_options& o) {
  const network_spec spec =
      o.spec.empty() ? parse_network_spec(pump_classifier, "(built-in)") : read_network_spec(o.spec, "SPEC");
  network_sections sections = build_sections(spec);
  check_plan_options(o, sections);
  const bool tty = isatty(STDERR_FILENO) != 0;
  const stream plan_stream = make_stream(o.seed, "kindling.plan");
  // Neither a cell's state nor an attention block's output has a closed form
  // (kindling/propagate/recurrent.hpp, attention.hpp): each cut is measured, fed the
  // second moment predicted for the layer below it, and the stack above it is predicted
  // from the moment measured at its top (the cell's last state, the block's output).
  std::vector<double> cut_moments, cut_inputs;
  std::vector<recurrent_report> cell_reports;
  std::vector<attention_report> attention_reports;
  const progress_executor progress{thread_executor(o.threads), tty};
  for (std::size_t k = 0; k < sections.cuts.size(); ++k) {
    sections = build_sections(spec, cut_moments);
    const layer_stack& below = sections.stacks[k];
    const double x2 = below.empty() ? below.input_second_moment() : predict(below).back().activation_moment;
    cut_inputs.push_back(x2);
    const network_sections::cut& cut = sections.cuts[k];
    if (cut.attention) {
      const attention_block& a = sections.attention[cut.index];
      attention_options ao;
      ao.trials = o.trials;
      ao.input_second_moment = x2;
      attention_reports.push_back(compare_attention(a, o.batch, plan_stream.named(a.label()), ao, progress));
      cut_moments.push_back(attention_reports.back().row("output").median);
    } else {
      const recurrent_cell& cell = sections.cells[cut.index];
      recurrent_options ro;
      ro.trials = o.trials;
      ro.input_second_moment = x2;
      cell_reports.push_back(compare_recurrent(cell, o.batch, plan_stream.named(cell.label()), ro, progress));
      cut_moments.push_back(cell_reports.back().median(&recurrent_moments::state, cell.steps() - 1));
    }
  }
  sections = build_sections(spec, cut_moments);

  plan_rows t;
  t.series.resize(4);
  t.series[0] = {"forward (pre-activation), predicted", "#1f5fa8", true, {}};
  t.series[1] = {"backward (gradient), predicted", "#c8501e", true, {}};
  t.series[2] = {"forward, measured", "#1f5fa8", false, {}};
  t.series[3] = {"backward, measured", "#c8501e", false, {}};
  std::size_t longest = 0;
  for (const layer_stack& stack : sections.stacks)
    for (std::size_t l = 0; l < stack.depth(); ++l) longest = std::max(longest, stack[l].label.size());
  for (const recurrent_cell& c : sections.cells) longest = std::max(longest, c.label().size());
  for (const attention_block& a : sections.attention) longest = std::max(longest, a.label().size() + 8);  // ".softmax"
  t.label_width = detail::table_label_width(longest);
  // The rows of stacks and cells are written here; attention rows by add_attention_rows.
  bool& agrees = t.agrees;
  json& layers = t.layers;
  json& warnings = t.warnings;
  std::vector<plot_series>& series = t.series;
  std::vector<std::string>&names = t.names, &lines = t.lines;
  std::vector<bool>& warned = t.warned;
  std::size_t& index = t.index;
  std::vector<judged_part> methods;
  for (std::size_t section = 0; section < sections.stacks.size(); ++section) {
    const layer_stack& stack = sections.stacks[section];
    std::vector<layer_prediction> predicted;
    propagation_report measured;
    if (!stack.empty()) {
      predicted = predict(stack);
      if (o.measure) {
        measure_options mo;
        mo.trials = o.trials;
        // Each draw streams the batch in slices of 32 samples: memory does not grow with
        // --batch (no batch x batch matrix), only the time does.  (The stack below the
        // first cell keeps the stream of a spec without cells.)
        const stream s = section == 0 ? plan_stream : plan_stream.named("above " + cut_label(sections, section - 1));
        measured = compare_propagation(stack, predicted, o.batch, s, mo, progress);
        // Cut into parts, each stack's budget covers its own rows (method_lines sums them).
        methods.push_back({index + 1, index + stack.depth(),
                           measured.method(sections.cuts.empty() ? "the whole table" : "these rows")});
      }
    }
    for (std::size_t l = 0; l < stack.depth(); ++l) {
      const stack_layer& L = stack[l];
      const layer_prediction& p = predicted[l];
      ++index;
      json row = {{"index", index},
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
      const double x = static_cast<double>(index);
      series[0].points.push_back({x, p.preactivation_variance});
      series[1].points.push_back({x, p.gradient_variance});
      for (const std::string& w : p.warnings) warnings.push_back("layer " + std::to_string(index) + " (" + L.label + "): " + w);
      bool row_agrees = true;
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
        row_agrees = c.agrees;
        if (!c.agrees) {
          agrees = false;
          warnings.push_back("layer " + std::to_string(index) + " (" + L.label + "): disagrees: " + measured.disagreement(l));
        }
      }
      layers.push_back(row);
      lines.push_back(detail::table_line(index, o.measure ? detail::comparison_cells(measured.layers[l])
                                                          : detail::prediction_cells(p), t.label_width, o.measure));
      names.push_back(L.label);
      warned.push_back(!p.warnings.empty() || !row_agrees);
    }
    if (section == sections.cuts.size()) break;
    const network_sections::cut& cut = sections.cuts[section];
    if (cut.attention) {
      add_attention_rows(sections.attention[cut.index], attention_reports[cut.index], cut_inputs[section], o.measure, t);
      continue;
    }
    // The cell above this stack: its gates at the last step (predicted from the measured
    // state, Chen, Pennington & Schoenholz 2018), its state and gradients measured only.
    const recurrent_cell& cell = sections.cells[cut.index];
    const recurrent_report& r = cell_reports[cut.index];
    const std::size_t last = cell.steps() - 1;
    ++index;
    std::vector<double> reads, gates;
    for (const recurrent_moments& d : r.draws) {
      reads.push_back(d.reads[last][0]);
      gates.push_back(d.gates[last][0]);
    }
    std::sort(reads.begin(), reads.end());
    std::sort(gates.begin(), gates.end());
    const double gate_predicted = cell.gate_moment(cut_inputs[section], reads[reads.size() / 2]);
    const double gate_measured = gates[gates.size() / 2];
    const double state = cut_moments[section];
    const double memory = r.median(&recurrent_moments::state_gradient, 0) /
                          r.median(&recurrent_moments::state_gradient, last);
    const measured_moment& g0 = r.gates[last][0];
    json row = {{"index", index},
                {"label", cell.label()},
                {"kind", "recurrent"},
                {"cell", cell_kind_name(cell.kind())},
                {"gates", gate_names(cell.kind())},
                {"steps", cell.steps()},
                {"fan_in", cell.input_width()},
                {"hidden", cell.hidden()},
                {"forget_bias", cell.forget_bias()},
                {"scheme", cell.input_scheme()},
                {"recurrent_scheme", cell.recurrent_scheme()},
                {"weight_std", std::sqrt(cell.input_weight_variance())},
                {"recurrent_weight_std", std::sqrt(cell.recurrent_weight_variance())},
                {"input_variance", cut_inputs[section]},
                {"forward_variance", gate_predicted},
                {"backward_variance", nullptr},
                {"measured_forward_variance", gate_measured},
                {"measured_backward_variance", r.median(&recurrent_moments::state_gradient, 0)},
                {"state_variance_measured", state},
                {"gradient_first_over_last", memory},
                {"gates_agree", r.gates_agree()},
                {"measured_only", {"state_variance_measured", "measured_backward_variance", "gradient_first_over_last"}}};
    layers.push_back(row);
    const double x = static_cast<double>(index);
    series[0].points.push_back({x, gate_predicted});
    if (o.measure) series[2].points.push_back({x, gate_measured});
    detail::table_cells cells;
    cells.label = cell.label();
    cells.fan_in = std::to_string(cell.input_width());
    cells.fan_out = std::to_string(cell.hidden());
    cells.activation = cell_kind_name(cell.kind());
    cells.scheme = cell.input_scheme();
    cells.weight_sd = std_text(cell.input_weight_variance());
    cells.fwd_var = number_text(gate_predicted);
    cells.fwd_med = number_text(gate_measured);
    cells.fwd_spread = number_text(std::exp(g0.spread), 3);
    cells.bwd_med = number_text(r.median(&recurrent_moments::state_gradient, 0));
    cells.agrees = r.gates_agree() ? "yes" : "NO";
    std::string text = detail::table_line(index, cells, t.label_width, o.measure);
    char line[512];
    std::snprintf(line, sizeof line,
                  "\n    cell: %s over %llu steps, forget bias %s, recurrent %s (sd %s); fwd: the %s gate's "
                  "pre-activation at the last step; gates %s the mean field at every step; measured only: state "
                  "E[h^2] at the last step %s, E[(dL/dh)^2] at the first step / at the last %s",
                  cell_kind_name(cell.kind()), static_cast<unsigned long long>(cell.steps()),
                  number_text(cell.forget_bias()).c_str(), cell.recurrent_scheme().c_str(),
                  std_text(cell.recurrent_weight_variance()).c_str(), gate_names(cell.kind())[0].c_str(),
                  r.gates_agree() ? "agree with" : "DISAGREE with", number_text(state).c_str(),
                  number_text(memory).c_str());
    text += line;
    lines.push_back(text);
    names.push_back(cell.label());
    warned.push_back(!r.gates_agree());
    if (!r.gates_agree()) {
      warnings.push_back("layer " + std::to_string(index) + " (" + cell.label() +
                         "): a gate's pre-activation disagrees with the mean field at some step");
      if (o.measure) agrees = false;
    }
  }
  if (!o.svg.empty()) {
    if (!o.measure) series.resize(2);
    const std::string title = spec.name.empty() ? o.spec : spec.name;
    const std::string subtitle = "mean-field prediction" +
                                 (o.measure ? std::string(" and the median of ") + std::to_string(o.trials) +
                                                  " draws of the weights, " + std::to_string(o.batch) +
                                                  " samples each (seed " + std::to_string(o.seed) + ")"
                                            : std::string(" (add --measure for measured points)"));
    write_output("--svg", o.svg, variance_plot_svg(title, subtitle, series, index, names, warned));
  }
  if (o.json) {
    json out = {{"layers", layers}, {"warnings", warnings}};
    if (!spec.name.empty()) out["name"] = spec.name;
    if (o.measure || !sections.cuts.empty()) {
      out["batch"] = o.batch;
      out["trials"] = o.trials;
    }
    if (o.measure) {
      out["false_alarm"] = measure_options{}.false_alarm;
      std::string method;
      for (const std::string& m : method_lines(methods, sections.cells.size(), sections.attention.size())) method += (method.empty() ? "" : "; ") + m;
      out["method"] = method;
    }
    std::printf("%s\n", out.dump(2).c_str());
  } else {
    std::string extent;  // a feature map: its channels over the extent
    for (std::size_t d = 0; d < spec.input_extent.size(); ++d) extent += (d ? " x " : "") + std::to_string(spec.input_extent[d]);
    std::printf("%s: input %llu %s, E[x^2] = %s\n", spec.name.empty() ? o.spec.c_str() : spec.name.c_str(),
                static_cast<unsigned long long>(spec.input_width),
                extent.empty() ? "features" : ("channels over " + extent + " positions").c_str(),
                number_text(spec.input_variance).c_str());
    std::printf("%s\n", detail::table_header(t.label_width, o.measure).c_str());
    for (const std::string& line : lines) std::printf("%s\n", line.c_str());
    if (!sections.cells.empty()) {
      std::printf("recurrent cells: %zu draws of %llu samples; the layers above a cell are predicted from its measured "
                  "state, and each part's bwd columns start from its own unit loss gradient\n", o.trials, static_cast<unsigned long long>(o.batch));
    }
    if (!sections.attention.empty()) {
      std::printf("attention blocks: %zu draws of %llu sequences, backward from the block's own unit loss gradient; a "
                  "row agrees when its mean ratio to the prediction given each draw is within the band, forward and "
                  "backward (compare_attention, false alarm <= %g a block); the layers above a block are predicted "
                  "from its measured output\n",
                  o.trials, static_cast<unsigned long long>(o.batch), attention_options{}.false_alarm);
    }
    for (const std::string& m : method_lines(methods, sections.cells.size(), sections.attention.size())) std::printf("%s\n", m.c_str());
    for (const auto& w : warnings) std::printf("warning: %s\n", w.get<std::string>().c_str());
    if (!o.svg.empty()) std::printf("wrote %s\n", o.svg.c_str());
  }
  return agrees ? exit_ok : exit_check_failed;
}
}  // namespace kindling::tool
