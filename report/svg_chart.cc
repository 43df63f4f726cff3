#include "report/svg_chart.h"

#include <algorithm>
#include <cassert>
#include <cmath>
#include <limits>
#include <numeric>
#include <sstream>
#include <tuple>

#include "report/html_text.h"

namespace chorus {
namespace {

constexpr const char* kPalette[] = {"#0072B2", "#D55E00", "#009E73", "#CC79A7",
                                    "#6A3D9A", "#8C510A", "#333333"};
constexpr const char* kFont =
    "system-ui, -apple-system, 'Segoe UI', Roboto, 'DejaVu Sans', Arial, sans-serif";
constexpr double kLeft = 62, kRight = 16, kTop = 12, kBottom = 46;  // plot margins, pixels
constexpr double kLegendRow = 18, kCharWidth = 6.6;  // legend row height, average glyph width
constexpr int kMaxTicks = 6;
constexpr size_t kMaxXLabels = 10;
constexpr double kTickSlack = 1e-9;  // of the domain width: ticks this near an end stay

std::string Px(double v) { return FormatFixed(v, 1); }

struct Tick {
  double at;  // in the (possibly log-transformed) data space of the axis
  std::string label;
};

// An axis's drawn data interval and its labelled ticks.
struct Domain {
  double lo = 0, hi = 1;
  std::vector<Tick> ticks;
};

// Nice ticks over [lo, hi], or over the fixed range if given (then the domain is exactly it).
Domain NumericDomain(double lo, double hi, const std::optional<std::pair<double, double>>& fixed) {
  if (fixed) std::tie(lo, hi) = *fixed;
  if (!(lo <= hi)) lo = 0, hi = 1;  // no data
  const Axis axis = NiceAxis(lo, hi, kMaxTicks);
  Domain d{fixed ? lo : axis.lo, fixed ? hi : axis.hi, {}};
  const double slack = kTickSlack * std::max(1.0, std::abs(d.hi - d.lo));
  for (double t : axis.ticks) {
    if (t >= d.lo - slack && t <= d.hi + slack) d.ticks.push_back({t, FormatTick(t, axis.step)});
  }
  return d;
}

struct LegendEntry {
  std::string name, colour;
  enum class Shape { kLine, kDashed, kBox } shape;
};

// Legend entries placed left to right, wrapping into rows of the plot's width.
struct Legend {
  std::vector<std::pair<double, int>> at;  // x and row of each entry
  int rows = 0;
};

Legend PlaceLegend(const std::vector<LegendEntry>& entries, double left, double right) {
  Legend legend;
  double x = left;
  for (const LegendEntry& e : entries) {
    const double width = 28 + kCharWidth * static_cast<double>(e.name.size()) + 18;
    if (legend.rows == 0 || (x + width > right && x > left)) x = left, ++legend.rows;
    legend.at.push_back({x, legend.rows - 1});
    x += width;
  }
  return legend;
}

std::string LegendSvg(const std::vector<LegendEntry>& entries, const Legend& legend) {
  std::ostringstream s;
  s << "<g class=\"legend\">";
  for (size_t i = 0; i < entries.size(); ++i) {
    const LegendEntry& e = entries[i];
    const double x = legend.at[i].first, y = kTop + kLegendRow * legend.at[i].second + 9;
    if (e.shape == LegendEntry::Shape::kBox) {
      s << "<rect x=\"" << Px(x) << "\" y=\"" << Px(y - 6)
        << "\" width=\"22\" height=\"12\" fill=\"" << e.colour << "\"/>";
    } else {
      s << "<line x1=\"" << Px(x) << "\" y1=\"" << Px(y) << "\" x2=\"" << Px(x + 22) << "\" y2=\""
        << Px(y) << "\" stroke=\"" << e.colour << "\" stroke-width=\"2.5\""
        << (e.shape == LegendEntry::Shape::kDashed ? " stroke-dasharray=\"6 4\"" : "") << "/>";
    }
    s << "<text x=\"" << Px(x + 28) << "\" y=\"" << Px(y + 4) << "\" fill=\"#222\">"
      << EscapeHtml(e.name) << "</text>";
  }
  s << "</g>";
  return s.str();
}

// The plot area and its scales.
struct Frame {
  double left, top, right, bottom;
  LinearScale x, y;
};

Frame MakeFrame(int width, int height, int legend_rows, const Domain& x, const Domain& y) {
  Frame f;
  f.left = kLeft;
  f.right = width - kRight;
  f.top = kTop + kLegendRow * legend_rows + (legend_rows > 0 ? 8 : 0);
  f.bottom = height - kBottom;
  f.x = {x.lo, x.hi, f.left, f.right};
  f.y = {y.lo, y.hi, f.bottom, f.top};
  return f;
}

std::string OpenSvg(int width, int height, const std::string& title) {
  std::ostringstream s;
  s << "<svg class=\"chart\" xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 " << width << " "
    << height << "\" width=\"" << width << "\" height=\"" << height << "\" role=\"img\" "
    << "aria-label=\"" << EscapeHtml(title) << "\" font-family=\"" << kFont
    << "\" font-size=\"12\"><title>" << EscapeHtml(title) << "</title>";
  return s.str();
}

// Gridlines, axis lines, tick labels and axis labels.
std::string AxesSvg(const Frame& f, const Domain& x, const Domain& y, const std::string& x_label,
                    const std::string& y_label) {
  std::ostringstream s;
  s << "<g class=\"axes\">";
  for (const Tick& t : y.ticks) {
    const std::string py = Px(f.y(t.at));
    s << "<line x1=\"" << Px(f.left) << "\" y1=\"" << py << "\" x2=\"" << Px(f.right) << "\" y2=\""
      << py << "\" stroke=\"#e2e2e2\"/><text x=\"" << Px(f.left - 7) << "\" y=\"" << py
      << "\" dy=\"4\" text-anchor=\"end\" fill=\"#555\">" << EscapeHtml(t.label) << "</text>";
  }
  for (const Tick& t : x.ticks) {
    const std::string px = Px(f.x(t.at));
    s << "<line x1=\"" << px << "\" y1=\"" << Px(f.bottom) << "\" x2=\"" << px << "\" y2=\""
      << Px(f.bottom + 5) << "\" stroke=\"#767676\"/><text x=\"" << px << "\" y=\""
      << Px(f.bottom + 18) << "\" text-anchor=\"middle\" fill=\"#555\">" << EscapeHtml(t.label)
      << "</text>";
  }
  s << "<path d=\"M" << Px(f.left) << " " << Px(f.top) << "V" << Px(f.bottom) << "H" << Px(f.right)
    << "\" fill=\"none\" stroke=\"#767676\"/>";
  s << "<text x=\"" << Px((f.left + f.right) / 2) << "\" y=\"" << Px(f.bottom + 38)
    << "\" text-anchor=\"middle\" fill=\"#222\">" << EscapeHtml(x_label) << "</text>";
  const double mid = (f.top + f.bottom) / 2;
  s << "<text x=\"16\" y=\"" << Px(mid) << "\" transform=\"rotate(-90 16 " << Px(mid)
    << ")\" text-anchor=\"middle\" fill=\"#222\">" << EscapeHtml(y_label) << "</text></g>";
  return s.str();
}

double Transform(const LineChartSpec& spec, double x) { return spec.log_x ? std::log10(x) : x; }

// Explicit ticks (thinned to about kMaxXLabels labels) or nice ticks over the series' x values.
Domain LineXDomain(const LineChartSpec& spec) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  auto include = [&](double x) {
    lo = std::min(lo, Transform(spec, x));
    hi = std::max(hi, Transform(spec, x));
  };
  for (const LineSeries& series : spec.series)
    std::for_each(series.x.begin(), series.x.end(), include);
  if (spec.x_ticks.empty()) return NumericDomain(lo, hi, spec.x_range);
  std::for_each(spec.x_ticks.begin(), spec.x_ticks.end(), include);
  Domain d{lo, hi, {}};
  if (spec.x_range) {
    d.lo = Transform(spec, spec.x_range->first), d.hi = Transform(spec, spec.x_range->second);
  } else {
    if (d.hi <= d.lo) d.lo -= 0.5, d.hi += 0.5;
    const double pad = 0.04 * (d.hi - d.lo);
    d.lo -= pad, d.hi += pad;
  }
  const size_t stride = (spec.x_ticks.size() + kMaxXLabels - 1) / kMaxXLabels;
  for (size_t i = 0; i < spec.x_ticks.size(); i += stride) {
    d.ticks.push_back({Transform(spec, spec.x_ticks[i]), FormatSignificant(spec.x_ticks[i], 4)});
  }
  return d;
}

Domain LineYDomain(const LineChartSpec& spec) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (const LineSeries& series : spec.series) {
    for (const std::vector<double>* v : {&series.y, &series.low, &series.high}) {
      for (double y : *v) lo = std::min(lo, y), hi = std::max(hi, y);
    }
  }
  return NumericDomain(lo, hi, spec.y_range);
}

std::string DefaultTooltip(const LineChartSpec& spec, const LineSeries& series, size_t i) {
  std::string text = series.name + ": " + spec.x_label + " " + FormatSignificant(series.x[i], 4) +
                     ", " + spec.y_label + " " + FormatSignificant(series.y[i], 4);
  if (!series.low.empty()) {
    text += " (min " + FormatSignificant(series.low[i], 4) + ", max " +
            FormatSignificant(series.high[i], 4) + ")";
  }
  return text;
}

// SVG path data through (x[i], y[i]) for i in `order`, in pixels.
std::string PathData(const LineChartSpec& spec, const LineSeries& series,
                     const std::vector<double>& y, const std::vector<size_t>& order,
                     const Frame& f) {
  std::string d;
  for (size_t i : order) {
    d += (d.empty() ? "M" : "L") + Px(f.x(Transform(spec, series.x[i]))) + " " + Px(f.y(y[i]));
  }
  return d;
}

std::string BandSvg(const LineChartSpec& spec, const LineSeries& series, const Frame& f) {
  if (series.low.empty()) return "";
  std::vector<size_t> forward(series.x.size());
  std::iota(forward.begin(), forward.end(), 0);
  const std::vector<size_t> backward(forward.rbegin(), forward.rend());
  const std::string back = PathData(spec, series, series.low, backward, f);
  return "<path class=\"data band\" d=\"" + PathData(spec, series, series.high, forward, f) + "L" +
         back.substr(1) + "Z\" fill=\"" + series.colour +
         "\" fill-opacity=\"0.16\" stroke=\"none\"/>";
}

std::string LineSvg(const LineChartSpec& spec, const LineSeries& series, const Frame& f) {
  auto x = [&](size_t i) { return Px(f.x(Transform(spec, series.x[i]))); };
  std::vector<size_t> order(series.x.size());
  std::iota(order.begin(), order.end(), 0);
  std::ostringstream s;
  s << "<path class=\"data line\" d=\"" << PathData(spec, series, series.y, order, f);
  s << "\" fill=\"none\" stroke=\"" << series.colour << "\" stroke-width=\"2\""
    << (series.dashed ? " stroke-dasharray=\"6 4\"" : "") << "/>";
  for (size_t i = 0; i < series.x.size(); ++i) {
    const std::string tip =
        series.tooltips.empty() ? DefaultTooltip(spec, series, i) : series.tooltips[i];
    s << "<circle class=\"data point\" cx=\"" << x(i) << "\" cy=\"" << Px(f.y(series.y[i]))
      << "\" r=\"3.2\" fill=\"" << series.colour << "\"><title>" << EscapeHtml(tip)
      << "</title></circle>";
  }
  return s.str();
}

// The dashed y = x reference over the part of the plot where it is visible.
std::string IdentitySvg(const Frame& f) {
  const double lo = std::max(f.x.domain_lo, f.y.domain_lo),
               hi = std::min(f.x.domain_hi, f.y.domain_hi);
  if (hi <= lo) return "";
  return "<path d=\"M" + Px(f.x(lo)) + " " + Px(f.y(lo)) + "L" + Px(f.x(hi)) + " " + Px(f.y(hi)) +
         "\" fill=\"none\" stroke=\"#767676\" stroke-width=\"1.5\" stroke-dasharray=\"6 4\"/>";
}

std::string BarsSvg(const BarChartSpec& spec, const Frame& f) {
  std::ostringstream s;
  const size_t groups = spec.groups.size();
  for (size_t b = 0; b + 1 < spec.edges.size(); ++b) {
    const double x0 = f.x(spec.edges[b]) + 1, x1 = f.x(spec.edges[b + 1]) - 1;
    const double w = std::max(0.5, (x1 - x0) / static_cast<double>(groups));
    for (size_t g = 0; g < groups; ++g) {
      const BarGroup& group = spec.groups[g];
      const double top = f.y(group.heights[b]);
      const std::string tip = group.tooltips.empty()
                                  ? group.name + ", " + spec.x_label + " " +
                                        FormatSignificant(spec.edges[b], 3) + " to " +
                                        FormatSignificant(spec.edges[b + 1], 3) + ": " +
                                        FormatSignificant(group.heights[b], 4)
                                  : group.tooltips[b];
      s << "<rect class=\"data bar\" x=\"" << Px(x0 + w * g) << "\" y=\"" << Px(top)
        << "\" width=\"" << Px(w) << "\" height=\"" << Px(f.bottom - top) << "\" fill=\""
        << group.colour << "\"><title>" << EscapeHtml(tip) << "</title></rect>";
    }
  }
  return s.str();
}

}  // namespace

const char* PaletteColour(size_t i) { return kPalette[i % (sizeof kPalette / sizeof kPalette[0])]; }

std::string LineChart(const LineChartSpec& spec) {
  std::vector<LegendEntry> entries;
  for (const LineSeries& s : spec.series) {
    entries.push_back(
        {s.name, s.colour, s.dashed ? LegendEntry::Shape::kDashed : LegendEntry::Shape::kLine});
  }
  if (!spec.identity_label.empty()) {
    entries.push_back({spec.identity_label, "#767676", LegendEntry::Shape::kDashed});
  }
  const Legend legend = PlaceLegend(entries, kLeft, spec.width - kRight);
  const Domain x = LineXDomain(spec), y = LineYDomain(spec);
  const Frame f = MakeFrame(spec.width, spec.height, legend.rows, x, y);
  std::string svg = OpenSvg(spec.width, spec.height, spec.title) +
                    AxesSvg(f, x, y, spec.x_label, spec.y_label) + LegendSvg(entries, legend);
  if (!spec.identity_label.empty()) svg += IdentitySvg(f);
  for (const LineSeries& s : spec.series) svg += BandSvg(spec, s, f);
  for (const LineSeries& s : spec.series) svg += LineSvg(spec, s, f);
  return svg + "</svg>";
}

std::string BarChart(const BarChartSpec& spec) {
  assert(spec.edges.size() >= 2);
  std::vector<LegendEntry> entries;
  double top = 0;
  for (const BarGroup& g : spec.groups) {
    assert(g.heights.size() + 1 == spec.edges.size());
    entries.push_back({g.name, g.colour, LegendEntry::Shape::kBox});
    for (double h : g.heights) top = std::max(top, h);
  }
  const Legend legend = PlaceLegend(entries, kLeft, spec.width - kRight);
  const Domain x = NumericDomain(0, 0, std::make_pair(spec.edges.front(), spec.edges.back()));
  const Domain y =
      top > 0 ? NumericDomain(0, top, std::nullopt) : NumericDomain(0, 0, std::make_pair(0.0, 1.0));
  const Frame f = MakeFrame(spec.width, spec.height, legend.rows, x, y);
  return OpenSvg(spec.width, spec.height, spec.title) +
         AxesSvg(f, x, y, spec.x_label, spec.y_label) + LegendSvg(entries, legend) +
         BarsSvg(spec, f) + "</svg>";
}

}  // namespace chorus
