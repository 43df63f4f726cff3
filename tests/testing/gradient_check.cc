#include "tests/testing/gradient_check.h"

#include <algorithm>
#include <cmath>
#include <sstream>

namespace chorus::testing {
namespace {

struct Mismatch {
  int64_t index = 0;
  double analytic = 0, numeric = 0, excess = 0;  // excess: error beyond the allowed bound
};

std::string Describe(std::vector<Mismatch> mismatches) {
  std::sort(mismatches.begin(), mismatches.end(),
            [](const Mismatch& a, const Mismatch& b) { return a.excess > b.excess; });
  std::ostringstream out;
  out << mismatches.size() << " parameter(s) differ from central differences; worst:";
  for (size_t k = 0; k < std::min<size_t>(mismatches.size(), 10); ++k) {
    const Mismatch& m = mismatches[k];
    out << "\n  [" << m.index << "] analytic " << m.analytic << ", numeric " << m.numeric;
  }
  return out.str();
}

}  // namespace

double CentralDifference(const LossFunction& loss, std::vector<float>& params, int64_t index,
                         double step) {
  const float original = params[index];
  const float plus = static_cast<float>(original + step);
  const float minus = static_cast<float>(original - step);
  params[index] = plus;
  const double loss_plus = loss(params);
  params[index] = minus;
  const double loss_minus = loss(params);
  params[index] = original;
  return (loss_plus - loss_minus) / (static_cast<double>(plus) - static_cast<double>(minus));
}

::testing::AssertionResult GradientMatchesCentralDifferences(const LossFunction& loss,
                                                             std::vector<float> params,
                                                             const std::vector<float>& analytic,
                                                             const GradientCheckOptions& options) {
  if (analytic.size() != params.size()) {
    return ::testing::AssertionFailure()
           << "gradient has " << analytic.size() << " entries, parameters " << params.size();
  }
  std::vector<Mismatch> mismatches;
  for (int64_t i = 0; i < static_cast<int64_t>(params.size()); ++i) {
    const double numeric = CentralDifference(loss, params, i, options.step);
    const double a = analytic[i];
    const double bound =
        options.abs_tolerance + options.rel_tolerance * std::max(std::abs(a), std::abs(numeric));
    const double error = std::abs(a - numeric);
    if (error <= bound) continue;
    const double excess = std::isfinite(error) ? error - bound : HUGE_VAL;  // NaN sorts first
    mismatches.push_back({i, a, numeric, excess});
  }
  if (mismatches.empty()) return ::testing::AssertionSuccess();
  return ::testing::AssertionFailure() << Describe(std::move(mismatches));
}

}  // namespace chorus::testing
