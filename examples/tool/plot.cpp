// examples/tool/plot.cpp: a small hand-written SVG line chart on a log scale.
#include "plot.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <limits>

namespace kindling::tool {

namespace {

std::string fmt(double x) {
  char b[32];
  std::snprintf(b, sizeof b, "%.1f", x);
  return b;
}

// Text as XML character data. Control characters are not allowed in XML 1.0, not even
// as character references, so a name from a spec that holds one (JSON allows "\u0001")
// shows U+FFFD instead, and tab, newline and return show as a space.
std::string escape(const std::string& s) {
  std::string o;
  for (char c : s) {
    const auto u = static_cast<unsigned char>(c);
    if (c == '\t' || c == '\n' || c == '\r') o += ' ';
    else if (u < 0x20 || u == 0x7f) o += "\xEF\xBF\xBD";
    else if (c == '&') o += "&amp;";
    else if (c == '<') o += "&lt;";
    else if (c == '>') o += "&gt;";
    else if (c == '"') o += "&quot;";
    else o += c;
  }
  return o;
}

}  // namespace

std::string variance_plot_svg(const std::string& title, const std::string& subtitle,
                              const std::vector<plot_series>& series, std::size_t depth,
                              const std::vector<std::string>& names, const std::vector<bool>& warned) {
  // The legend sits right of the plot, so it never hides a point; layer names, slanted,
  // need more room below it.
  const bool named = names.size() == depth && depth > 0;
  const double width = 980, height = named ? 560 : 480;
  const double left = 84, right = 316, top = 66, bottom = named ? 144 : 64;
  const double pw = width - left - right, ph = height - top - bottom;
  // The variance axis spans whole decades around every positive value.
  double lo = std::numeric_limits<double>::infinity(), hi = 0;
  for (const plot_series& s : series) {
    for (const auto& p : s.points) {
      if (p.second > 0 && std::isfinite(p.second)) {
        lo = std::min(lo, p.second);
        hi = std::max(hi, p.second);
      }
    }
  }
  if (!(hi > 0)) {
    lo = 0.1;
    hi = 10;
  }
  int d0 = static_cast<int>(std::floor(std::log10(lo))), d1 = static_cast<int>(std::ceil(std::log10(hi)));
  if (d1 - d0 < 2) {
    --d0;
    ++d1;
  }
  const int step = std::max(1, (d1 - d0 + 7) / 8);
  const double n = static_cast<double>(std::max<std::size_t>(depth, 2));
  const auto sx = [&](double layer) { return left + (depth <= 1 ? pw / 2 : (layer - 1) / (n - 1) * pw); };
  const auto sy = [&](double v) {
    return top + ph - (std::log10(v) - d0) / static_cast<double>(d1 - d0) * ph;
  };

  std::string o;
  o += "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" + fmt(width) + "\" height=\"" + fmt(height) +
       "\" viewBox=\"0 0 " + fmt(width) + " " + fmt(height) +
       "\" font-family=\"DejaVu Sans, Helvetica, Arial, sans-serif\" font-size=\"13\">\n";
  o += "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";
  o += "<text x=\"" + fmt(left) + "\" y=\"26\" font-size=\"16\" font-weight=\"bold\">" + escape(title) + "</text>\n";
  o += "<text x=\"" + fmt(left) + "\" y=\"46\" fill=\"#444444\">" + escape(subtitle) + "</text>\n";
  // grid and variance ticks: one line a decade, labelled 10^k
  for (int k = d0; k <= d1; ++k) {
    const double y = sy(std::pow(10.0, k));
    const bool labelled = (k - d0) % step == 0;
    o += "<line x1=\"" + fmt(left) + "\" y1=\"" + fmt(y) + "\" x2=\"" + fmt(left + pw) + "\" y2=\"" + fmt(y) +
         "\" stroke=\"#dddddd\"/>\n";
    if (labelled) {
      o += "<text x=\"" + fmt(left - 8) + "\" y=\"" + fmt(y + 4) + "\" text-anchor=\"end\">10<tspan dy=\"-6\" font-size=\"10\">" +
           std::to_string(k) + "</tspan></text>\n";
    }
  }
  // depth ticks: numbers, or the layers' names slanted (a warned layer in red, with "!"
  // -- every warned layer is labelled, whatever the spacing)
  const std::size_t every = std::max<std::size_t>(1, (depth + (named ? 23 : 11)) / (named ? 24 : 12));
  bool any_warned = false;
  for (std::size_t l = 1; l <= depth; ++l) {
    const bool warns = named && l - 1 < warned.size() && warned[l - 1];
    any_warned = any_warned || warns;
    if ((l - 1) % every != 0 && l != depth && !warns) continue;
    const double x = sx(static_cast<double>(l));
    o += "<line x1=\"" + fmt(x) + "\" y1=\"" + fmt(top + ph) + "\" x2=\"" + fmt(x) + "\" y2=\"" + fmt(top + ph + 5) +
         "\" stroke=\"" + (warns ? "#c00000" : "black") + "\"/>\n";
    if (named) {
      const std::string y = fmt(top + ph + 16);
      o += "<text x=\"" + fmt(x) + "\" y=\"" + y + "\" text-anchor=\"end\" font-size=\"11\" transform=\"rotate(-40 " +
           fmt(x) + " " + y + ")\"" + (warns ? " fill=\"#c00000\" class=\"warns\"" : "") + ">" +
           escape(names[l - 1] + (warns ? " !" : "")) + "</text>\n";
    } else {
      o += "<text x=\"" + fmt(x) + "\" y=\"" + fmt(top + ph + 20) + "\" text-anchor=\"middle\">" + std::to_string(l) +
           "</text>\n";
    }
  }
  if (any_warned) {
    o += "<text x=\"" + fmt(left + pw + 24) + "\" y=\"" + fmt(top + ph + 20) +
         "\" fill=\"#c00000\">red, with !: the layer warns</text>\n";
  }
  o += "<rect x=\"" + fmt(left) + "\" y=\"" + fmt(top) + "\" width=\"" + fmt(pw) + "\" height=\"" + fmt(ph) +
       "\" fill=\"none\" stroke=\"black\"/>\n";
  o += "<text x=\"" + fmt(left + pw / 2) + "\" y=\"" + fmt(height - 18) + "\" text-anchor=\"middle\">layer (depth)</text>\n";
  o += "<text transform=\"translate(22," + fmt(top + ph / 2) +
       ") rotate(-90)\" text-anchor=\"middle\">variance (log scale)</text>\n";
  // the series: lines for predictions, circles for measurements
  for (const plot_series& s : series) {
    if (s.line) {
      std::string path;
      for (const auto& p : s.points) {
        if (!(p.second > 0)) continue;
        path += (path.empty() ? "M" : " L") + fmt(sx(p.first)) + "," + fmt(sy(p.second));
      }
      o += "<path d=\"" + path + "\" fill=\"none\" stroke=\"" + s.colour + "\" stroke-width=\"2.5\"/>\n";
    } else {
      for (const auto& p : s.points) {
        if (!(p.second > 0)) continue;
        o += "<circle cx=\"" + fmt(sx(p.first)) + "\" cy=\"" + fmt(sy(p.second)) + "\" r=\"4.5\" fill=\"white\" stroke=\"" +
             s.colour + "\" stroke-width=\"2\"/>\n";
      }
    }
  }
  // legend, right of the plot
  const double lw = 290, lh = 10 + 20 * static_cast<double>(series.size());
  const double lx = left + pw + 16, ly = top;
  o += "<rect x=\"" + fmt(lx) + "\" y=\"" + fmt(ly) + "\" width=\"" + fmt(lw) + "\" height=\"" + fmt(lh) +
       "\" fill=\"white\" fill-opacity=\"0.9\" stroke=\"#999999\"/>\n";
  for (std::size_t i = 0; i < series.size(); ++i) {
    const plot_series& s = series[i];
    const double y = ly + 16 + 20 * static_cast<double>(i);
    if (s.line) {
      o += "<line x1=\"" + fmt(lx + 10) + "\" y1=\"" + fmt(y - 4) + "\" x2=\"" + fmt(lx + 38) + "\" y2=\"" + fmt(y - 4) +
           "\" stroke=\"" + s.colour + "\" stroke-width=\"2.5\"/>\n";
    } else {
      o += "<circle cx=\"" + fmt(lx + 24) + "\" cy=\"" + fmt(y - 4) + "\" r=\"4.5\" fill=\"white\" stroke=\"" + s.colour +
           "\" stroke-width=\"2\"/>\n";
    }
    o += "<text x=\"" + fmt(lx + 46) + "\" y=\"" + fmt(y) + "\">" + escape(s.label) + "</text>\n";
  }
  o += "</svg>\n";
  return o;
}

}  // namespace kindling::tool
