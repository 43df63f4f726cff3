// Member weights learned on validation data. Both methods see only L(i, m): member m's predictive
// probability (classification) or density (regression) of validation input i's true target,
// evaluated at temperature 1. The temperature is tuned afterwards, on the weighted mixture.
// Thread safety: free functions, reentrant.
#pragma once

#include <vector>

#include "common/matrix.h"

namespace chorus {

struct StackingResult {
  std::vector<double> weights;  // on the simplex
  double log_score = 0;         // mean_i ln sum_m w_m L(i, m) at the optimum
  double optimality_gap = 0;    // max_m mean_i L(i,m) / q_i - 1 at the end (0 at the optimum)
  int iterations = 0;
};

// Stacking of predictive distributions (Yao, Vehtari, Simpson & Gelman, Bayesian Analysis 2018):
// maximise mean_i ln sum_m w_m L(i, m) over the simplex. The objective is concave; the solver
// stops when the KKT gap max_m mean_i L(i,m)/q_i - 1 (q_i = sum_m w_m L(i,m)) is below
// `tolerance`, or after max_iterations. Requires L >= 0 with every row's sum > 0.
StackingResult StackingWeights(const MatrixD& likelihoods, double tolerance = 1e-6,
                               int max_iterations = 100000);

// Ensemble selection (Caruana, Niculescu-Mizil, Crew & Ksikes, ICML 2004): start from the single
// member with the best validation NLL, then `rounds` times add (with replacement) the member that
// most lowers the NLL of the uniform mixture of the chosen multiset; return the multiset of the
// best round as weights = counts / size. Never worse on validation than the best single member.
std::vector<double> GreedyWeights(const MatrixD& likelihoods, int rounds);

// mean_i -ln sum_m w_m L(i, m), the validation NLL a weighting gives.
double MixtureNllFromLikelihoods(const MatrixD& likelihoods, const std::vector<double>& weights);

}  // namespace chorus
