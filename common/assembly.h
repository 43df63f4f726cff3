// Assembly: turning members' outputs into one predictive distribution (a weighted mixture) and
// tuning its temperature on validation data. Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <functional>
#include <vector>

#include "common/matrix.h"
#include "common/metrics.h"

namespace chorus {

// Classification: each member's logits on one split, inputs x classes.
// Returns sum_m w_m softmax(z_m / T), inputs x classes, computed in double with the usual
// max-subtraction. Requires: all logits the same shape, weights.size() == logits.size(),
// weights >= 0 summing to 1, temperature > 0.
MatrixD MixtureProbabilities(const std::vector<const Matrix*>& logits,
                             const std::vector<double>& weights, double temperature);

// Regression: member m's predicted mean and standard deviation (original units) on one split,
// each a vector of inputs. The mixture has stddev scaled by `scale` (> 0).
struct MemberGaussian {
  std::vector<double> mean;
  std::vector<double> stddev;
};
GaussianMixture MixtureGaussians(const std::vector<const MemberGaussian*>& members,
                                 const std::vector<double>& weights, double scale);

// The temperature T > 0 minimising the validation NLL of MixtureProbabilities, searched over
// log T in [ln 0.05, ln 20]: a coarse grid brackets the minimum, then golden-section search
// narrows it to |d log T| < 1e-6. Deterministic.
double TuneTemperature(const std::vector<const Matrix*>& logits, const std::vector<double>& weights,
                       const std::vector<int32_t>& labels);

// Regression's counterpart: the scale s on every member's stddev minimising validation NLL.
double TuneStddevScale(const std::vector<const MemberGaussian*>& members,
                       const std::vector<double>& weights, const std::vector<double>& targets);

// The range TuneTemperature and TuneStddevScale search: [0.05, 20].
constexpr double kMinTunedScale = 0.05, kMaxTunedScale = 20.0;

// Whether a tuned temperature or scale ended within 1% of either end of that range: the
// validation rows held no evidence that stops it (e.g. no confident mistake to punish
// sharpening), so the value says more about the validation rows than about calibration.
bool AtTuningRangeEnd(double tuned);

// Minimises a unimodal-ish f over [lo, hi]: grid of `grid` points to bracket, then golden section
// to width `tol`. Exposed for tests.
double MinimiseScalar(const std::function<double(double)>& f, double lo, double hi, int grid,
                      double tol);

}  // namespace chorus
