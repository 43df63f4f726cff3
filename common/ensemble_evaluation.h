// What evaluating an ensemble on test yields (EvaluateEnsemble, common/evaluation.h): scores of
// each member, the mean and best member and the ensemble, its uncertainty split, calibration
// diagrams and size grid. Thread safety: plain values, safe to share read-only between threads.
#pragma once

#include <cstdint>
#include <optional>
#include <vector>

#include "common/config.h"
#include "common/diversity.h"
#include "common/metrics.h"
#include "common/reliability.h"
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
  int samples = 1;
  Scores test;             // the member alone (average over its samples), temperature 1
  Scores test_point;       // the trained point alone, before any basin phase, temperature 1
  double validation_nll = 0;
};

// Test averages of the per-input uncertainty split (nats for classification, squared target
// units for regression), and for classification how well each part flags wrong predictions.
struct UncertaintySummary {
  double total = 0, aleatoric = 0, epistemic = 0;
  double auroc_total = 0, auroc_aleatoric = 0, auroc_epistemic = 0;  // classification only
  std::vector<double> coverages;            // 0.50, 0.55, ..., 1.00
  std::vector<double> selective_accuracy;   // classification: accuracy on the most confident c
  std::vector<double> selective_rmse;       // regression: RMSE on the c with least total variance
  // The epistemic part per test input of the calibrated mixture, binned (common/reliability.h).
  // Classification: mutual information (nats); hits are correct predictions. Regression: standard
  // deviation of the members' means (target units); hits are targets inside the 90% interval.
  OutcomeHistogram epistemic_histogram;
};

struct EnsembleEvaluation {
  Task task = Task::kClassification;
  Weighting weighting = Weighting::kUniform;
  std::vector<double> weights;   // one per member, summing to 1
  double validation_nll_weighted = 0;  // validation NLL of the weighted mixture at T = 1
  double validation_nll_calibrated = 0;  // the same at the tuned T
  double temperature = 1.0;      // classification: logits / T; regression: stddev * T
  bool tuned_temperature = false;  // T was tuned on validation (ensemble.temperature: tune)
  Scores test;                   // ensemble, calibrated
  Scores test_uncalibrated;      // ensemble, T = 1
  // With basin fits: the same members' trained points alone, assembled the same way (own weights
  // and temperature), so the gain from sampling is visible at equal seeds.
  std::optional<Scores> test_without_basin;
  std::vector<MemberScores> members;
  Scores mean_member;            // metric-wise mean over members
  int best_member = 0;           // position in `members` with the lowest validation NLL
  UncertaintySummary uncertainty;
  DiversitySummary diversity;    // of the test predictions at T = 1 (common/diversity.h)
  // Classification: reliability diagrams of the test mixture at T = 1 and at the tuned T, with
  // report.ece_bins bins. Empty for regression.
  std::vector<ReliabilityBin> reliability_uncalibrated, reliability;
  // Regression: coverage of the test mixture's central intervals at nominal levels 0.05, 0.10,
  // ..., 0.95, at scale 1 and at the tuned scale. Empty for classification.
  std::vector<IntervalCoverage> interval_coverage_uncalibrated, interval_coverage;
  std::vector<SizeCurvePoint> size_curve;
  double size_curve_seconds = 0;  // wall time the size grid took (steady clock)
  std::optional<double> bayes_optimal_test_nll;  // when true class probabilities are known
};

}  // namespace chorus
