// Mapping data to chart pixels and choosing axis ticks: the arithmetic under the report's SVG
// charts (report/svg_chart.h), kept apart so it can be tested against hand-computed values.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>
#include <vector>

namespace chorus {

// Maps the data interval [domain_lo, domain_hi] linearly onto [range_lo, range_hi] (pixels; for a
// y axis range_lo > range_hi, since SVG's y grows downward). A zero-width domain maps every value
// to the middle of the range.
struct LinearScale {
  double domain_lo = 0, domain_hi = 1, range_lo = 0, range_hi = 1;
  double operator()(double v) const;
};

// An axis for the data interval [lo, hi]: step is the smallest of 1, 2 or 5 times a power of ten
// such that [lo, hi] extended outward to multiples of step holds at most max_ticks multiples;
// `lo`/`hi` are that extended interval and `ticks` its multiples of step, ascending. An interval
// with hi <= lo is first widened to [lo - d, lo + d], d = |lo| / 10 (1 if lo is 0).
// Requires max_ticks >= 2 and finite lo, hi.
struct Axis {
  double lo = 0, hi = 1, step = 1;
  std::vector<double> ticks;
};
Axis NiceAxis(double lo, double hi, int max_ticks);

// A tick label: v with as many decimals as step needs (none for step >= 1), e.g.
// FormatTick(0.4, 0.2) == "0.4", FormatTick(0.05, 0.05) == "0.05", FormatTick(1500, 500) ==
// "1500". Requires step > 0.
std::string FormatTick(double v, double step);

}  // namespace chorus
