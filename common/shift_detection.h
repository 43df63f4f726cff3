// How well a predictive's uncertainty tells shifted or out-of-distribution inputs from the
// in-distribution test set: the AUROC of each per-input uncertainty score, shifted inputs being
// the positives (0.5 = chance, 1 = every shifted input scores above every test input). The
// usual evaluation of out-of-distribution detection (Hendrycks & Gimpel 2017, ICLR, "A Baseline
// for Detecting Misclassified and Out-of-Distribution Examples").
// Thread safety: free functions, reentrant.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "common/assembly.h"
#include "common/matrix.h"

namespace chorus {

// NaN where a score does not apply (mutual information of a single component is 0 everywhere).
struct ShiftAurocs {
  // Classification: entropy of the mixture (nats), mutual information, and 1 - the largest
  // probability. Regression: total and epistemic standard deviation; max_probability is NaN.
  double entropy = 0, mutual_information = 0, max_probability = 0;
  double total_std = 0, epistemic_std = 0;
  // The scores' means on each set, so a user sees the size of the gap, not only its ranking:
  // classification entropy (nats), regression total standard deviation (target units).
  double mean_score_test = 0, mean_score_shifted = 0;
};

// components_test[c] / components_shifted[c]: component c's logits on the test and shifted rows;
// the mixture sum_c w_c softmax(z_c / T). Requires at least one component and one row in each set.
ShiftAurocs ClassificationShiftAurocs(const std::vector<const Matrix*>& components_test,
                                      const std::vector<const Matrix*>& components_shifted,
                                      const std::vector<double>& weights, double temperature);

// The same for Gaussian components (original units), standard deviations scaled by `scale`.
ShiftAurocs RegressionShiftAurocs(const std::vector<const MemberGaussian*>& components_test,
                                  const std::vector<const MemberGaussian*>& components_shifted,
                                  const std::vector<double>& weights, double scale);

// One predictive of the run scored on the shifted set (coordinator/shift_evaluation.h).
struct ShiftDetection {
  std::string predictive;  // "one member", "members' trained points", "ensemble"
  int components = 0;      // networks mixed
  double temperature = 1;  // classification: logits / T; regression: stddev * T
  ShiftAurocs aurocs;
};

struct ShiftEvaluation {
  std::string file;        // data.shift_test as configured
  int64_t rows = 0;        // shifted rows scored
  int64_t test_rows = 0;   // in-distribution test rows they are told apart from
  std::vector<ShiftDetection> predictives;
};

}  // namespace chorus
