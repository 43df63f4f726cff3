#include "report/svg_chart.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

namespace chorus {
namespace svg_chart_test {

size_t Count(const std::string& text, const std::string& needle) {
  size_t n = 0;
  for (size_t at = text.find(needle); at != std::string::npos; at = text.find(needle, at + 1)) ++n;
  return n;
}

TEST(SvgChartTest, PaletteStartsWithOkabeItoBlueAndCycles) {
  EXPECT_STREQ(PaletteColour(0), "#0072B2");
  EXPECT_STREQ(PaletteColour(1), "#D55E00");
  EXPECT_STREQ(PaletteColour(7), PaletteColour(0));
}

LineChartSpec TwoSeries() {
  LineChartSpec spec;
  spec.title = "quality & size";
  spec.x_label = "members";
  spec.y_label = "NLL";
  spec.x_range = spec.y_range = std::make_pair(0.0, 1.0);
  LineSeries a{"a<b & c",     PaletteColour(0), {0, 0.5, 1}, {0, 0.5, 1},
               {0, 0.4, 0.9}, {0.1, 0.6, 1},    false,       {}};
  LineSeries b{"second", PaletteColour(1), {0, 0.5, 1}, {1, 0.5, 0}, {}, {}, true, {}};
  spec.series = {a, b};
  return spec;
}

TEST(SvgChartTest, LineChartDrawsBandsLinesAndPointsWithEscapedText) {
  const std::string svg = LineChart(TwoSeries());
  EXPECT_EQ(svg.rfind("<svg class=\"chart\"", 0), 0u);
  EXPECT_EQ(svg.substr(svg.size() - 6), "</svg>");
  EXPECT_EQ(Count(svg, "class=\"data band\""), 1u);
  EXPECT_EQ(Count(svg, "class=\"data line\""), 2u);
  EXPECT_EQ(Count(svg, "class=\"data point\""), 6u);
  EXPECT_EQ(Count(svg, "<title>"), 7u);  // the chart's and one per point
  EXPECT_NE(svg.find("a&lt;b &amp; c"), std::string::npos);
  EXPECT_EQ(svg.find("a<b"), std::string::npos);
  EXPECT_NE(svg.find("aria-label=\"quality &amp; size\""), std::string::npos);
  EXPECT_EQ(svg.find("<script"), std::string::npos);
  EXPECT_EQ(svg, LineChart(TwoSeries()));  // deterministic
}

TEST(SvgChartTest, PointsLandWhereTheScalesPutThem) {
  // Plot area: x from 62 to 460 - 16 = 444; y = 0 at 300 - 46 = 254.
  const std::string svg = LineChart(TwoSeries());
  EXPECT_NE(svg.find("<circle class=\"data point\" cx=\"62.0\" cy=\"254.0\""), std::string::npos);
  EXPECT_NE(svg.find("cx=\"444.0\" cy=\"254.0\""), std::string::npos);  // series b at (1, 0)
  EXPECT_NE(svg.find("cx=\"253.0\""), std::string::npos);               // x = 0.5
}

TEST(SvgChartTest, LogXAxisSpacesDecadesEvenly) {
  LineChartSpec spec;
  spec.x_label = "samples";
  spec.y_label = "NLL";
  spec.log_x = true;
  spec.x_ticks = {1, 10, 100};
  spec.series = {{"s", PaletteColour(0), {1, 10, 100}, {0.5, 0.4, 0.3}, {}, {}, false, {}}};
  const std::string svg = LineChart(spec);
  // log10 x in [0, 2] padded by 4% each side: x = 10 sits in the middle of 62 .. 444.
  EXPECT_NE(svg.find("cx=\"253.0\""), std::string::npos);
  for (const char* label : {">1<", ">10<", ">100<"}) EXPECT_NE(svg.find(label), std::string::npos);
}

TEST(SvgChartTest, BarChartDrawsOneBarPerGroupAndBinFromZero) {
  BarChartSpec spec;
  spec.x_label = "confidence";
  spec.y_label = "count";
  spec.edges = {0, 0.5, 1};
  spec.groups = {{"before", PaletteColour(1), {3, 0}, {}}, {"after", PaletteColour(0), {1, 2}, {}}};
  const std::string svg = BarChart(spec);
  EXPECT_EQ(Count(svg, "class=\"data bar\""), 4u);
  // y runs from 0 to 3 (nice step 1): the tallest bar reaches the top tick, the empty one has
  // zero height at the x axis.
  EXPECT_NE(svg.find(">3<"), std::string::npos);
  EXPECT_NE(svg.find("y=\"38.0\" width="), std::string::npos);  // plot top, below one legend row
  EXPECT_NE(svg.find("y=\"254.0\" width="), std::string::npos);
  EXPECT_NE(svg.find("height=\"0.0\""), std::string::npos);
}

}  // namespace svg_chart_test
}  // namespace chorus
