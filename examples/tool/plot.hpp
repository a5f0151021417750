// examples/tool/plot.hpp: the variance-through-depth picture of `kindling plan --svg`.
#ifndef KINDLING_TOOL_PLOT_HPP
#define KINDLING_TOOL_PLOT_HPP

#include <string>
#include <utility>
#include <vector>

namespace kindling::tool {

/// One curve: drawn as a line (predicted) or as points (measured).
struct plot_series {
  std::string label;
  std::string colour;
  bool line = true;
  std::vector<std::pair<double, double>> points;  // (layer, variance)
};

/// An SVG document: the series against depth 1..depth on a log-scaled variance axis,
/// with axes, tick labels, axis titles and a legend.  With `names` (one a layer) the
/// depth axis is labelled with them, and the layers `warned` marks are drawn in red with
/// a "!" (a legend line says so).
std::string variance_plot_svg(const std::string& title, const std::string& subtitle,
                              const std::vector<plot_series>& series, std::size_t depth,
                              const std::vector<std::string>& names = {}, const std::vector<bool>& warned = {});

}  // namespace kindling::tool

#endif  // KINDLING_TOOL_PLOT_HPP
