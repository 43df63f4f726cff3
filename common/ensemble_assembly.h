// Assembling members' samples into one weighted, tempered mixture: member weights learned on
// validation at T = 1, then one temperature (classification) or stddev scale (regression) tuned on
// validation for the weighted mixture (why in this order: common/evaluation.h), scored on test.
// members[m][s] is member m's sample s on one split. Thread safety: reentrant free functions.
#pragma once

#include <cstdint>
#include <vector>

#include "common/config.h"
#include "common/ensemble_evaluation.h"
#include "common/matrix.h"
#include "common/size_curve.h"

namespace chorus {

// Appends every member's samples to one component list, each with weight w[m] / S_m (member m's
// weight shared equally by its S_m samples), in member order, then sample order.
template <typename T>
void FlattenSamples(const std::vector<std::vector<const T*>>& members, const std::vector<double>& w,
                    std::vector<const T*>* components, std::vector<double>* component_weights) {
  for (size_t m = 0; m < members.size(); ++m) {
    for (const T* c : members[m]) {
      components->push_back(c);
      component_weights->push_back(w[m] / static_cast<double>(members[m].size()));
    }
  }
}

// inputs x members: L(i, m) = mean_s softmax(z_ms)(i, y_i), member m's probability of the true
// label of input i.
MatrixD ClassLikelihoods(const MemberSamples& members, const std::vector<int32_t>& labels);

// inputs x members: L(i, m) = mean_s N(y_i; mu_ms, sigma_ms^2), in 1 / target units.
MatrixD GaussianLikelihoods(const MemberSampleGaussians& members, const std::vector<double>& y);

// One assembled mixture: weights per member (summing to 1), temperature, and its scores.
struct AssembledMixture {
  std::vector<double> weights;
  double validation_nll = 0;             // at T = 1
  double validation_nll_calibrated = 0;  // at the tuned T
  double temperature = 1;                // ensemble.temperature unless tuned
  Scores test, test_uncalibrated;        // at T and at 1
};

// Classification: members' logits on validation and test; test scores use `ece_bins` bins.
AssembledMixture AssembleClassification(const MemberSamples& validation,
                                        const std::vector<int32_t>& validation_labels,
                                        const MemberSamples& test,
                                        const std::vector<int32_t>& test_labels,
                                        const EnsembleConfig& ensemble, int ece_bins);

// Regression: members' Gaussians and targets in original units on validation and test.
AssembledMixture AssembleRegression(const MemberSampleGaussians& validation,
                                    const std::vector<double>& validation_targets,
                                    const MemberSampleGaussians& test,
                                    const std::vector<double>& test_targets,
                                    const EnsembleConfig& ensemble);

}  // namespace chorus
