// Scores of a predictive distribution against the truth. All rates are fractions; NLL is the
// mean over inputs in nats. Thread safety: free functions, reentrant.
#pragma once

#include <cstddef>
#include <cstdint>
#include <vector>

#include "common/matrix.h"

namespace chorus {

struct ClassificationMetrics {
  double accuracy = 0;  // share of inputs whose arg-max class is the label (ties: lowest index)
  double nll = 0;       // mean of -ln p[label]; p is floored at 1e-300 before the log
  double brier = 0;     // mean over inputs of sum_k (p_k - [k == label])^2 (multi-class Brier)
  double ece = 0;       // expected calibration error, see ExpectedCalibrationError
};

// probs: inputs x classes, rows sum to 1. labels: one class index per row.
ClassificationMetrics ScoreClassification(const MatrixD& probs, const std::vector<int32_t>& labels,
                                          int ece_bins);

// ECE with top-label confidence c_i = max_k p_ik (Naeini et al., AAAI 2015; Guo et al., ICML
// 2017): bins b = 0..B-1 cover ((b)/B, (b+1)/B], c = 0 goes to bin 0;
// ECE = sum_b (n_b / N) * |accuracy_b - mean confidence_b|.
double ExpectedCalibrationError(const MatrixD& probs, const std::vector<int32_t>& labels, int bins);

// A Gaussian-mixture predictive per input: component m of input i has mean(i, m), stddev(i, m)
// (> 0) and weight weights[m] (weights sum to 1). Units: the target's original units.
struct GaussianMixture {
  MatrixD mean;            // inputs x components
  MatrixD stddev;          // inputs x components
  std::vector<double> weights;
};

struct RegressionMetrics {
  double rmse = 0;         // root mean squared error of the mixture mean
  double nll = 0;          // mean of -ln sum_m w_m N(y; mu_m, sigma_m^2), nats
  double coverage_90 = 0;  // share of targets inside the mixture's central 90% interval
};

RegressionMetrics ScoreRegression(const GaussianMixture& mixture, const std::vector<double>& targets);

// The `nll` of ScoreRegression alone (no quantile search): cheap enough to call while tuning.
double MixtureNll(const GaussianMixture& mixture, const std::vector<double>& targets);

// F(x) of input i's mixture: sum_m w_m Phi((x - mu_m) / sigma_m), Phi the standard normal CDF.
double MixtureCdf(const GaussianMixture& mixture, int64_t i, double x);

// How many of n inputs a coverage c in (0, 1] asks for: ceil(c n) clamped to [1, n], n > 0. The
// ceiling is taken 1e-9 below c n, so that c n = 7.000000000000001 (0.07 * 100) asks for 7.
size_t CoveredCount(double c, size_t n);

// The class of row i with the highest probability; ties go to the lowest index.
int64_t TopClass(const MatrixD& probs, int64_t i);

// The q-quantile (0 < q < 1) of input i's mixture, by bisection on the mixture CDF to 1e-10 of
// the interval width.
double MixtureQuantile(const GaussianMixture& mixture, int64_t i, double q);

}  // namespace chorus
