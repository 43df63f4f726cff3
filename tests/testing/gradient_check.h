// A gradient checker: compares an analytic gradient with central finite differences of the loss,
// one parameter at a time. Parameters are float32 (the Mlp layout), the loss a double.
// Thread safety: free functions; the loss function is called from the calling thread only.
#pragma once

#include <gtest/gtest.h>

#include <cstdint>
#include <functional>
#include <vector>

namespace chorus::testing {

// The loss at a parameter vector. Must be deterministic: the same params give the same value.
using LossFunction = std::function<double(const std::vector<float>& params)>;

struct GradientCheckOptions {
  double step = 1e-2;           // h; parameter i is evaluated at fl(w_i + h) and fl(w_i - h)
  double abs_tolerance = 1e-4;  // see GradientMatchesCentralDifferences
  double rel_tolerance = 1e-2;
};

// The central difference (L(w+) - L(w-)) / (w+_i - w-_i), where w± equal params except
// w±_i = fl(params_i ± step): dividing by the float32 values actually evaluated keeps the
// representation error of the step out of the quotient. `params` is restored before returning.
double CentralDifference(const LossFunction& loss, std::vector<float>& params, int64_t index,
                         double step);

// Succeeds when, for every parameter i, the analytic derivative a_i and the central difference
// n_i satisfy |a_i - n_i| <= abs_tolerance + rel_tolerance * max(|a_i|, |n_i|). Requires
// analytic.size() == params.size(). On failure the message gives the number of mismatches and
// the worst ten (index, analytic, numeric).
::testing::AssertionResult GradientMatchesCentralDifferences(const LossFunction& loss,
                                                             std::vector<float> params,
                                                             const std::vector<float>& analytic,
                                                             const GradientCheckOptions& options);

}  // namespace chorus::testing
