#include "common/baseline_evaluation.h"

#include <cmath>
#include <type_traits>

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

// Validation predictions of a model family: with fold_of_row, out of fold (fold k's rows
// predicted by fit(train rows outside fold k)); otherwise `full` on data.validation.
// fit(split) -> StatusOr<Model>; predict(model, x) -> M (Matrix or MatrixD).
template <typename Model, typename Fit, typename Predict>
StatusOr<std::invoke_result_t<Predict, const Model&, const Matrix&>> ValidationPredictions(
    const PreparedData& data, const std::vector<int>& fold_of_row, const Model& full,
    const Fit& fit, const Predict& predict) {
  using M = std::invoke_result_t<Predict, const Model&, const Matrix&>;
  if (fold_of_row.empty()) return predict(full, data.validation.x);
  std::vector<M> parts;
  for (int k = 0; k < data.folds; ++k) {
    const FoldRows rows = RowsOfFold(fold_of_row, k);
    StatusOr<Model> m = fit(SelectRows(data.train, rows.train));
    if (!m.ok()) return m.status().WithContext("fold " + std::to_string(k));
    parts.push_back(predict(m.value(), SelectRows(data.train, rows.held_out).x));
  }
  std::vector<const M*> pointers;
  for (const M& p : parts) pointers.push_back(&p);
  return ScatterByFold(fold_of_row, pointers);
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
  // The fold fits keep the prior precision the evidence chose on all training rows: searching
  // it again per fold would cost k more evidence searches (seconds each for a few hundred
  // parameters).
  const auto fit = [&](const Split& rows) { return FitClassifier(rows, classes, full.value().alpha); };
  StatusOr<Matrix> validation = ValidationPredictions(data, fold_of_row, full.value(), fit, PredictClassifier);
  if (!validation.ok()) {
    out.skipped = validation.status().message();
    return;
  }
  const Matrix& val = validation.value();
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
  const auto predict = [&](const BayesianLinearRegression& m, const Matrix& x) {
    return PredictRegression(m, x, data);
  };
  StatusOr<MatrixD> val = ValidationPredictions(data, fold_of_row, full.value(), FitRegression, predict);
  if (!val.ok()) {
    out.skipped = val.status().message();
    return;
  }
  const std::vector<double> y_val = TargetUnits(fold_of_row.empty() ? data.validation : data.train, data);
  const std::vector<double> y_test = TargetUnits(data.test, data);
  const MemberGaussian gv = ToMemberGaussian(val.value());
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
