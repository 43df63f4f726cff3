// The linear baseline of every report (common/linear_baseline.h): fitted on the same
// preprocessed features as the members, given the same one-parameter calibration on the same
// validation rows (a temperature, or a scale on the standard deviation), and scored on test, so
// that the report can say plainly when a linear model serves better than the ensemble.
// Thread safety: free functions, reentrant.
#pragma once

#include <string>
#include <vector>

#include "common/ensemble_evaluation.h"
#include "common/prepared_data.h"

namespace chorus {

struct BaselineEvaluation {
  std::string model;            // what was fitted, in words
  std::string skipped;          // why no baseline was fitted ("" when it was)
  Scores test;                  // at the tuned temperature / scale
  Scores test_uncalibrated;     // at 1
  double temperature = 1.0;     // classification: log-probabilities / T; regression: stddev * T
  double validation_nll = 0;    // at the tuned temperature, on the rows the ensemble's was
  // The fitted hyperparameters on all training rows: alpha, beta and the effective number of
  // parameters (regression) or alpha (classification), and the log evidence.
  std::vector<std::pair<std::string, double>> hyperparameters;
};

// Fits the baseline on data.train and predicts validation and test. With fold_of_row (cross-
// fitting, data.folds > 0), the validation predictions are out of fold: fold k's rows come from
// a fit without them, and validation is the whole training split, as for the ensemble (the
// classifier's fold fits keep the prior precision the evidence chose on all training rows). With
// tune_temperature false the temperature stays 1. A fit that cannot be made (too many
// parameters for the exact Laplace Hessian, a singular problem) is reported in `skipped`.
BaselineEvaluation EvaluateBaseline(const PreparedData& data, const std::vector<int>& fold_of_row,
                                    bool tune_temperature, int ece_bins);

}  // namespace chorus
