#include "report/chart_scale.h"

#include <algorithm>
#include <cassert>
#include <cmath>

#include "report/html_text.h"

namespace chorus {
namespace {

// Slack for floating-point residues when rounding to multiples of a step.
constexpr double kStepSlack = 1e-9;

}  // namespace

double LinearScale::operator()(double v) const {
  if (domain_hi == domain_lo) return (range_lo + range_hi) / 2;
  return range_lo + (v - domain_lo) / (domain_hi - domain_lo) * (range_hi - range_lo);
}

Axis NiceAxis(double lo, double hi, int max_ticks) {
  assert(max_ticks >= 2 && std::isfinite(lo) && std::isfinite(hi));
  if (hi <= lo) {
    const double d = lo == 0 ? 1.0 : std::abs(lo) / 10;
    hi = lo + d, lo -= d;
  }
  Axis axis;
  double magnitude = std::pow(10.0, std::floor(std::log10((hi - lo) / max_ticks)));
  for (int i = 0;; i = (i + 1) % 3) {
    axis.step = magnitude * (i == 0 ? 1 : i == 1 ? 2 : 5);
    axis.lo = std::floor(lo / axis.step + kStepSlack) * axis.step;
    axis.hi = std::ceil(hi / axis.step - kStepSlack) * axis.step;
    if (std::llround((axis.hi - axis.lo) / axis.step) + 1 <= max_ticks) break;
    if (i == 2) magnitude *= 10;
  }
  const long long count = std::llround((axis.hi - axis.lo) / axis.step);
  for (long long k = 0; k <= count; ++k) {
    const double t = axis.lo + static_cast<double>(k) * axis.step;
    axis.ticks.push_back(std::abs(t) < axis.step * kStepSlack ? 0.0 : t);
  }
  return axis;
}

std::string FormatTick(double v, double step) {
  assert(step > 0);
  const int decimals = std::max(0, static_cast<int>(-std::floor(std::log10(step) + kStepSlack)));
  return FormatFixed(v, decimals);
}

}  // namespace chorus
