// Assembling finished members into the ensemble and scoring everything on test: each member, the
// mean and best member, the ensemble before and after temperature, and the size curve.
// Thread safety: free functions, reentrant.
#pragma once

#include <optional>
#include <vector>

#include "common/assembly.h"
#include "common/config.h"
#include "common/dataset.h"
#include "common/member_training.h"
#include "common/metrics.h"
#include "common/size_curve.h"

namespace chorus {

// Test-set scores of one predictive; classification fills `classification`, regression
// `regression`.
struct Scores {
  ClassificationMetrics classification;
  RegressionMetrics regression;
};

struct MemberScores {
  int index = 0;
  uint64_t seed = 0;
  Scores test;             // the member alone, temperature 1
  double validation_nll = 0;
};

struct EnsembleEvaluation {
  Task task = Task::kClassification;
  std::vector<double> weights;   // one per member, summing to 1 (uniform for now)
  double temperature = 1.0;      // classification: logits / T; regression: stddev * T
  Scores test;                   // ensemble, calibrated
  Scores test_uncalibrated;      // ensemble, T = 1
  std::vector<MemberScores> members;
  Scores mean_member;            // metric-wise mean over members
  int best_member = 0;           // position in `members` with the lowest validation NLL
  std::vector<SizeCurvePoint> size_curve;
  std::optional<double> bayes_optimal_test_nll;  // when true class probabilities are known
};

// Member m's Gaussian predictive (original target units) from its (mean, log-variance) outputs on
// the standardised target: mean = mu * scale + shift, stddev = exp(s / 2) * scale.
MemberGaussian ToGaussian(const Matrix& outputs, const PreparedData& data);

// Requires at least one member; every member's outputs match the data's validation/test rows.
// true_probabilities: optional test rows x classes matrix of the data's true class probabilities.
EnsembleEvaluation EvaluateEnsemble(const PreparedData& data, const std::vector<MemberResult>& members,
                                    const EnsembleConfig& ensemble, const ReportConfig& report,
                                    uint64_t seed, const Matrix* true_probabilities);

}  // namespace chorus
