// Per-input uncertainty a user can act on, split into what the data leaves open (aleatoric) and
// what the models disagree on (epistemic), and how well each flags wrong predictions.
// Thread safety: free functions, reentrant.
#pragma once

#include <vector>

#include "common/matrix.h"
#include "common/metrics.h"

namespace chorus {

// Classification (Depeweg et al., ICML 2018): for components c with weights w_c (sum 1) and
// probabilities p_c(i, .), the mixture p = sum_c w_c p_c and, per input, in nats:
//   total     = H[p]                         (entropy of the mixture)
//   aleatoric = sum_c w_c H[p_c]             (expected entropy)
//   epistemic = total - aleatoric            (mutual information, >= 0)
struct UncertaintySplit {
  std::vector<double> total, aleatoric, epistemic;
};
UncertaintySplit SplitEntropy(const std::vector<MatrixD>& component_probs,
                              const std::vector<double>& weights);

// Regression, law of total variance for a Gaussian mixture, per input:
//   aleatoric = sum_m w_m sigma_m^2;  epistemic = sum_m w_m (mu_m - mu)^2;  total = their sum.
UncertaintySplit SplitVariance(const GaussianMixture& mixture);

// Area under the ROC curve of `score` for separating positive from negative inputs: the
// probability a random positive scores higher than a random negative, ties counting 1/2
// (Mann-Whitney U / (n_pos n_neg)). Returns NaN if either class is empty.
double Auroc(const std::vector<double>& score, const std::vector<bool>& positive);

// Selective prediction: for each coverage c in `coverages` (fractions in (0, 1]), the accuracy on
// the ceil(c * n) inputs with the highest confidence (ties broken by input order).
std::vector<double> SelectiveAccuracy(const std::vector<double>& confidence,
                                      const std::vector<bool>& correct,
                                      const std::vector<double>& coverages);

}  // namespace chorus
