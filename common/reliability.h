// How far a predictive can be taken at its word, as data for report charts: reliability diagrams
// (classification), coverage of central intervals at several nominal levels (regression),
// histograms of a per-input score for hits and misses, and selective RMSE.
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <vector>

#include "common/matrix.h"
#include "common/metrics.h"

namespace chorus {

// One bin of a top-label reliability diagram.
struct ReliabilityBin {
  double lower = 0, upper = 0;  // the bin holds confidences in (lower, upper]; bin 0 also holds 0
  int64_t count = 0;            // inputs whose top-label confidence falls in the bin
  double confidence = 0;        // their mean top-label confidence (0 when count is 0)
  double accuracy = 0;          // share of them whose arg-max class is the label (0 when empty)
};

// Top-label reliability diagram with ExpectedCalibrationError's bins and tie rule
// (common/metrics.h): b = ceil(c B) - 1 clamped to [0, B-1], arg-max ties go to the lowest class,
// so ECE = sum_b count_b / N * |accuracy_b - confidence_b|.
// Requires bins >= 1 and one label per row of probs (inputs x classes).
std::vector<ReliabilityBin> ReliabilityBins(const MatrixD& probs,
                                            const std::vector<int32_t>& labels, int bins);

// Probability integral transform u_i = F_i(y_i), F_i the CDF of input i's Gaussian mixture.
// Requires one target per row of the mixture.
std::vector<double> MixturePit(const GaussianMixture& mixture, const std::vector<double>& targets);

// Observed coverage of central intervals: target i lies inside the central interval of nominal
// level q iff |u_i - 1/2| <= q / 2, u = MixturePit. At q = 0.9 this is ScoreRegression's
// coverage_90 up to its quantile search tolerance.
struct IntervalCoverage {
  double nominal = 0;   // q in (0, 1)
  double observed = 0;  // share of targets inside
};
std::vector<IntervalCoverage> IntervalCoverages(const std::vector<double>& pit,
                                                const std::vector<double>& nominal_levels);

// Histogram of a non-negative per-input score, counted separately for hits and misses (a
// classification hit is a correct prediction; a regression hit is a target inside the 90%
// interval). `bins` equal-width bins over [0, upper]: upper is the 99th percentile (nearest rank,
// ceil(0.99 n)-th smallest) of all scores, or their maximum if that is 0, or 1 if every score is
// 0. Bin b holds scores in [b w, (b + 1) w), w = upper / bins; scores >= upper go to the last bin.
struct OutcomeHistogram {
  std::vector<double> edges;          // bins + 1 ascending edges, edges[0] = 0
  std::vector<int64_t> hits, misses;  // counts per bin
};
// Requires bins >= 1, scores.size() == hit.size(), every score >= 0.
OutcomeHistogram HistogramByOutcome(const std::vector<double>& scores, const std::vector<bool>& hit,
                                    int bins);

// Selective prediction for regression: for each coverage c in (0, 1], the RMSE of `errors` over
// the ceil(c n) inputs with the lowest `uncertainty` (ties broken by input order).
// Requires errors.size() == uncertainty.size(); NaN for each c when there are no inputs.
std::vector<double> SelectiveRmse(const std::vector<double>& uncertainty,
                                  const std::vector<double>& errors,
                                  const std::vector<double>& coverages);

}  // namespace chorus
