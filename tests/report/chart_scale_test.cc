#include "report/chart_scale.h"

#include <gtest/gtest.h>

#include <string>

namespace chorus {
namespace chart_scale_test {

TEST(ChartScaleTest, LinearScaleMapsEndsMidpointsAndDescendingRanges) {
  const LinearScale x{0, 10, 100, 200};
  EXPECT_DOUBLE_EQ(x(0), 100);
  EXPECT_DOUBLE_EQ(x(5), 150);
  EXPECT_DOUBLE_EQ(x(10), 200);
  const LinearScale y{0, 1, 300, 100};  // SVG y grows downward
  EXPECT_DOUBLE_EQ(y(0.25), 250);
  EXPECT_DOUBLE_EQ(LinearScale({3, 3, 0, 50})(7), 25);  // zero-width domain: the middle
}

TEST(ChartScaleTest, NiceAxisPicksTheSmallestOneTwoFiveStepThatFits) {
  struct Case {
    double lo, hi, step, axis_lo, axis_hi;
    size_t ticks;
  };
  const Case cases[] = {
      {0.84, 0.92, 0.02, 0.84, 0.92, 5},  // 0.01 would give 9 ticks
      {0, 1, 0.2, 0, 1, 6},
      {0.613, 0.647, 0.01, 0.61, 0.65, 5},
      {0, 73, 20, 0, 80, 5},
      {3, 3, 0.2, 2.6, 3.4, 5},  // widened to [2.7, 3.3] first
      {0, 0, 0.5, -1, 1, 5},     // widened to [-1, 1]
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(std::to_string(c.lo) + " .. " + std::to_string(c.hi));
    const Axis a = NiceAxis(c.lo, c.hi, 6);
    EXPECT_NEAR(a.step, c.step, 1e-12);
    EXPECT_NEAR(a.lo, c.axis_lo, 1e-12);
    EXPECT_NEAR(a.hi, c.axis_hi, 1e-12);
    ASSERT_EQ(a.ticks.size(), c.ticks);
    EXPECT_NEAR(a.ticks.front(), c.axis_lo, 1e-12);
    EXPECT_NEAR(a.ticks.back(), c.axis_hi, 1e-12);
  }
  // A tick at zero is exactly zero, never a rounding residue printed as "-0.0".
  EXPECT_EQ(FormatTick(NiceAxis(0, 0, 6).ticks[2], 0.5), "0.0");
}

TEST(ChartScaleTest, FormatTickShowsTheDecimalsTheStepNeeds) {
  EXPECT_EQ(FormatTick(0.4, 0.2), "0.4");
  EXPECT_EQ(FormatTick(0.05, 0.05), "0.05");
  EXPECT_EQ(FormatTick(0.84, 0.02), "0.84");
  EXPECT_EQ(FormatTick(0.1 * 3, 0.1), "0.3");
  EXPECT_EQ(FormatTick(1500, 500), "1500");
  EXPECT_EQ(FormatTick(20, 10), "20");
}

}  // namespace chart_scale_test
}  // namespace chorus
