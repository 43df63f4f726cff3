// Inline SVG charts for self-contained HTML reports: line charts with shaded spread bands and
// bar charts over bins, with nice ticks (report/chart_scale.h), gridlines, axis labels and a
// legend. The output is
// deterministic text with no scripts, ids, fonts or external references; colours and text sizes
// are set on the elements, so a chart looks the same outside the report. Every element that
// draws data carries class "data" (bands "data band", lines "data line", points "data point",
// bars "data bar"); each point and bar has a <title> tooltip.
// Thread safety: free functions, reentrant.
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "report/chart_scale.h"

namespace chorus {

// Colour i of the chart palette (cycling): Okabe & Ito's colour-blind-safe colours without the
// light ones, then dark purple, brown and near-black; each has at least 3:1 contrast on white.
const char* PaletteColour(size_t i);

// One line of a line chart, drawn with a point at every (x, y).
struct LineSeries {
  std::string name;               // legend entry
  std::string colour;             // CSS colour, e.g. PaletteColour(0)
  std::vector<double> x, y;       // same length, drawn in this order
  std::vector<double> low, high;  // empty, or a shaded band from low to high at every x
  bool dashed = false;
  std::vector<std::string> tooltips;  // empty, or one per point (default: name, x and y)
};

struct LineChartSpec {
  std::string title;             // the chart's accessible name (<title>, aria-label)
  std::string x_label, y_label;  // axis labels, units included
  std::vector<LineSeries> series;
  std::vector<double> x_ticks;  // explicit x ticks (at most ~10 are labelled); empty: nice ticks
  bool log_x = false;           // x drawn on a log10 scale; requires x > 0 and x_ticks
  std::optional<std::pair<double, double>> x_range, y_range;  // fixed ranges; default: the data's
  std::string identity_label;     // non-empty: draw the dashed line y = x with this legend entry
  int width = 460, height = 300;  // pixels
};

// The <svg> element of a line chart. Requires every series' vectors to have matching lengths.
std::string LineChart(const LineChartSpec& spec);

// One group of bars, one bar per bin; groups sit side by side within each bin.
struct BarGroup {
  std::string name;  // legend entry
  std::string colour;
  std::vector<double> heights;        // one per bin, >= 0
  std::vector<std::string> tooltips;  // empty, or one per bin (default: name, bin and height)
};

struct BarChartSpec {
  std::string title, x_label, y_label;
  std::vector<double> edges;  // bins + 1 ascending bin edges
  std::vector<BarGroup> groups;
  int width = 460, height = 300;
};

// The <svg> element of a grouped bar chart over bins; y starts at 0.
// Requires edges.size() >= 2 and every group to have edges.size() - 1 heights.
std::string BarChart(const BarChartSpec& spec);

}  // namespace chorus
