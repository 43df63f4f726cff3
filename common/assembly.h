// Assembly: turning members' outputs into one predictive distribution (a weighted mixture) and
// tuning its temperature on validation data. Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <cstddef>
#include <functional>
#include <map>
#include <vector>

#include "common/matrix.h"
#include "common/metrics.h"
#include "common/parallel_for.h"

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

// Each component's ln softmax(z_i / T)[y_i] at the 41 temperatures of TuneTemperature's coarse
// grid, computed once for tunings that share components (the size grid tunes a temperature for
// every subset of the same members; its grid then costs a log-sum-exp per row instead of a
// softmax per member and row). Holds nothing (tunings compute as without it) when it would take
// more than kMaxBytes. Thread safety: const after construction.
class TemperatureGridTerms {
 public:
  static constexpr size_t kMaxBytes = size_t{64} << 20;
  static constexpr int kGridPoints = 41;

  // components: logits, rows x classes, each with one label per row in `labels`; kept by
  // address, so they must outlive this object and not change.
  TemperatureGridTerms(const std::vector<const Matrix*>& components, const std::vector<int32_t>& labels,
                       const ParallelFor* parallel);

  // Component's terms at grid point j (one per row), or null if it is not held.
  const Eigen::VectorXd* Find(const Matrix* component, int j) const;

 private:
  std::map<const Matrix*, size_t> index_;
  std::vector<Eigen::VectorXd> terms_;  // [index * kGridPoints + j]
};

// The temperature T > 0 minimising the validation NLL of MixtureProbabilities, searched over
// log T in [ln 0.05, ln 20]: a coarse grid of 41 points brackets the minimum, then
// golden-section search narrows it to |d log T| < 1e-6. Deterministic; grid_terms (built for
// the same labels, or null) saves work and changes no bit of the result.
double TuneTemperature(const std::vector<const Matrix*>& logits, const std::vector<double>& weights,
                       const std::vector<int32_t>& labels,
                       const TemperatureGridTerms* grid_terms = nullptr);

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
