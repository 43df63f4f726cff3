#include "common/baseline_evaluation.h"

#include <algorithm>
#include <cmath>

#include "common/assembly.h"
#include "common/folds.h"
#include "common/linear_baseline.h"
#include "common/metrics.h"

namespace chorus {
namespace {

// Log-probabilities of the Laplace predictive as float "logits": softmax(log p / T) is
// temperature scaling of the predictive itself. p is floored at 1e-300 before the log.
Matrix LogProbabilities(const MatrixD& p) {
  return p.cwiseMax(1e-300).array().log().matrix().cast<float>();
}

// alpha 0: chosen by the evidence; > 0: fixed.
StatusOr<LaplaceLogisticRegression> FitClassifier(const Split& s, int classes, double alpha = 0) {
  LaplaceLogisticOptions options;
  options.alpha = alpha;
  return FitLaplaceLogisticRegression(s.x, s.labels.data(), classes, options);
}

Matrix PredictClassifier(const LaplaceLogisticRegression& m, const Matrix& x) {
  return LogProbabilities(PredictLaplaceLogisticRegression(m, x));
}

StatusOr<BayesianLinearRegression> FitRegression(const Split& s) {
  return FitBayesianLinearRegression(s.x, s.targets.data());
}

// Regression predictions as a rows x 2 matrix (mean, stddev) in target units, in double.
MatrixD PredictRegression(const BayesianLinearRegression& m, const Matrix& x, const PreparedData& d) {
  Eigen::VectorXd mean, stddev;
  PredictBayesianLinearRegression(m, x, &mean, &stddev);
  MatrixD out(x.rows(), 2);
  out.col(0) = mean.array() * d.target_scale + d.target_mean;
  out.col(1) = stddev * d.target_scale;
  return out;
}

// Rows of per_fold[k] put back in training-row order (common/folds.h ScatterByFold, in double).
MatrixD ScatterRows(const std::vector<int>& fold_of_row, const std::vector<MatrixD>& per_fold) {
  MatrixD out(static_cast<Eigen::Index>(fold_of_row.size()), per_fold[0].cols());
  std::vector<Eigen::Index> next(per_fold.size(), 0);
  for (size_t i = 0; i < fold_of_row.size(); ++i) {
    out.row(static_cast<Eigen::Index>(i)) = per_fold[fold_of_row[i]].row(next[fold_of_row[i]]++);
  }
  return out;
}

MemberGaussian ToMemberGaussian(const MatrixD& m) {
  MemberGaussian g;
  const Eigen::VectorXd mean = m.col(0), sd = m.col(1);  // m is row-major: copy the columns out
  g.mean.assign(mean.data(), mean.data() + mean.size());
  g.stddev.assign(sd.data(), sd.data() + sd.size());
  return g;
}

std::vector<double> TargetUnits(const Split& s, const PreparedData& d) {
  std::vector<double> y;
  for (float t : s.targets) y.push_back(static_cast<double>(t) * d.target_scale + d.target_mean);
  return y;
}

void ClassificationBaseline(const PreparedData& data, const std::vector<int>& fold_of_row,
                            bool tune, int bins, BaselineEvaluation& out) {
  const int classes = static_cast<int>(data.classes());
  StatusOr<LaplaceLogisticRegression> full = FitClassifier(data.train, classes);
  if (!full.ok()) {
    out.skipped = full.status().message();
    return;
  }
  Matrix val;
  if (fold_of_row.empty()) {
    val = PredictClassifier(full.value(), data.validation.x);
  } else {
    std::vector<Matrix> parts;
    for (int k = 0; k < data.folds; ++k) {
      const FoldRows rows = RowsOfFold(fold_of_row, k);
      // The prior precision the evidence chose on all training rows: searching it again per fold
      // would cost k more evidence searches (seconds each for a few hundred parameters).
      StatusOr<LaplaceLogisticRegression> m =
          FitClassifier(SelectRows(data.train, rows.train), classes, full.value().alpha);
      if (!m.ok()) {
        out.skipped = "fold " + std::to_string(k) + ": " + m.status().message();
        return;
      }
      parts.push_back(PredictClassifier(m.value(), SelectRows(data.train, rows.held_out).x));
    }
    std::vector<const Matrix*> pointers;
    for (const Matrix& p : parts) pointers.push_back(&p);
    val = ScatterByFold(fold_of_row, pointers);
  }
  const Split& v = fold_of_row.empty() ? data.validation : data.train;
  const Matrix test = PredictClassifier(full.value(), data.test.x);
  out.temperature = tune ? TuneTemperature({&val}, {1.0}, v.labels) : 1.0;
  out.validation_nll = ScoreClassification(MixtureProbabilities({&val}, {1.0}, out.temperature), v.labels, bins).nll;
  out.test.classification = ScoreClassification(MixtureProbabilities({&test}, {1.0}, out.temperature), data.test.labels, bins);
  out.test_uncalibrated.classification = ScoreClassification(MixtureProbabilities({&test}, {1.0}, 1.0), data.test.labels, bins);
  out.hyperparameters = {{"alpha", full.value().alpha}, {"log_evidence", full.value().log_evidence}};
}

void RegressionBaseline(const PreparedData& data, const std::vector<int>& fold_of_row, bool tune,
                        BaselineEvaluation& out) {
  StatusOr<BayesianLinearRegression> full = FitRegression(data.train);
  if (!full.ok()) {
    out.skipped = full.status().message();
    return;
  }
  MatrixD val;
  if (fold_of_row.empty()) {
    val = PredictRegression(full.value(), data.validation.x, data);
  } else {
    std::vector<MatrixD> parts;
    for (int k = 0; k < data.folds; ++k) {
      const FoldRows rows = RowsOfFold(fold_of_row, k);
      StatusOr<BayesianLinearRegression> m = FitRegression(SelectRows(data.train, rows.train));
      if (!m.ok()) {
        out.skipped = "fold " + std::to_string(k) + ": " + m.status().message();
        return;
      }
      parts.push_back(PredictRegression(m.value(), SelectRows(data.train, rows.held_out).x, data));
    }
    val = ScatterRows(fold_of_row, parts);
  }
  const std::vector<double> y_val = TargetUnits(fold_of_row.empty() ? data.validation : data.train, data);
  const std::vector<double> y_test = TargetUnits(data.test, data);
  const MemberGaussian gv = ToMemberGaussian(val);
  const MemberGaussian gt = ToMemberGaussian(PredictRegression(full.value(), data.test.x, data));
  out.temperature = tune ? TuneStddevScale({&gv}, {1.0}, y_val) : 1.0;
  out.validation_nll = MixtureNll(MixtureGaussians({&gv}, {1.0}, out.temperature), y_val);
  out.test.regression = ScoreRegression(MixtureGaussians({&gt}, {1.0}, out.temperature), y_test);
  out.test_uncalibrated.regression = ScoreRegression(MixtureGaussians({&gt}, {1.0}, 1.0), y_test);
  const BayesianLinearRegression& f = full.value();
  out.hyperparameters = {{"alpha", f.alpha}, {"beta", f.beta},
                         {"effective_parameters", f.effective_parameters}, {"log_evidence", f.log_evidence}};
}

}  // namespace

BaselineEvaluation EvaluateBaseline(const PreparedData& data, const std::vector<int>& fold_of_row,
                                    bool tune_temperature, int ece_bins) {
  BaselineEvaluation out;
  if (data.task == Task::kClassification) {
    out.model = data.classes() == 2 ? "logistic regression, L2 prior chosen by evidence, Laplace predictive"
                                    : "softmax regression, L2 prior chosen by evidence, Laplace predictive";
    ClassificationBaseline(data, fold_of_row, tune_temperature, ece_bins, out);
  } else {
    out.model = "Bayesian linear regression, prior and noise precisions chosen by evidence";
    RegressionBaseline(data, fold_of_row, tune_temperature, out);
  }
  return out;
}

}  // namespace chorus
