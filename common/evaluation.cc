#include "common/evaluation.h"

#include <cmath>

#include "common/heads.h"
#include "common/rng.h"

namespace chorus {
namespace {

std::vector<double> OriginalTargets(const Split& split, const PreparedData& data) {
  std::vector<double> y(split.targets.size());
  for (size_t i = 0; i < y.size(); ++i) {
    y[i] = static_cast<double>(split.targets[i]) * data.target_scale + data.target_mean;
  }
  return y;
}

void AddScaled(Scores& into, const Scores& s, double w) {
  ClassificationMetrics& c = into.classification;
  c.accuracy += w * s.classification.accuracy;
  c.nll += w * s.classification.nll;
  c.brier += w * s.classification.brier;
  c.ece += w * s.classification.ece;
  RegressionMetrics& r = into.regression;
  r.rmse += w * s.regression.rmse;
  r.nll += w * s.regression.nll;
  r.coverage_90 += w * s.regression.coverage_90;
}

void EvaluateClassification(const PreparedData& data, const std::vector<MemberResult>& members,
                            const EnsembleConfig& ens, const ReportConfig& rep, uint64_t seed,
                            EnsembleEvaluation& ev) {
  std::vector<const Matrix*> val, test;
  for (const MemberResult& m : members) {
    val.push_back(&m.validation_outputs);
    test.push_back(&m.test_outputs);
  }
  ev.temperature = ens.tune_temperature ? TuneTemperature(val, ev.weights, data.validation.labels)
                                        : ens.temperature;
  ev.test.classification = ScoreClassification(MixtureProbabilities(test, ev.weights, ev.temperature),
                                               data.test.labels, rep.ece_bins);
  ev.test_uncalibrated.classification = ScoreClassification(
      MixtureProbabilities(test, ev.weights, 1.0), data.test.labels, rep.ece_bins);
  for (size_t m = 0; m < members.size(); ++m) {
    ev.members[m].test.classification =
        ScoreClassification(Softmax(members[m].test_outputs), data.test.labels, rep.ece_bins);
    ev.members[m].validation_nll =
        ScoreClassification(Softmax(members[m].validation_outputs), data.validation.labels, 1).nll;
  }
  ev.size_curve = ClassificationSizeCurve(val, data.validation.labels, test, data.test.labels,
                                          rep.size_curve_subsets, rep.ece_bins, seed);
}

void EvaluateRegression(const PreparedData& data, const std::vector<MemberResult>& members,
                        const EnsembleConfig& ens, const ReportConfig& rep, uint64_t seed,
                        EnsembleEvaluation& ev) {
  std::vector<MemberGaussian> val_g, test_g;
  for (const MemberResult& m : members) {
    val_g.push_back(ToGaussian(m.validation_outputs, data));
    test_g.push_back(ToGaussian(m.test_outputs, data));
  }
  std::vector<const MemberGaussian*> val, test;
  for (size_t m = 0; m < members.size(); ++m) {
    val.push_back(&val_g[m]);
    test.push_back(&test_g[m]);
  }
  const std::vector<double> y_val = OriginalTargets(data.validation, data);
  const std::vector<double> y_test = OriginalTargets(data.test, data);
  ev.temperature = ens.tune_temperature ? TuneStddevScale(val, ev.weights, y_val) : ens.temperature;
  ev.test.regression = ScoreRegression(MixtureGaussians(test, ev.weights, ev.temperature), y_test);
  ev.test_uncalibrated.regression = ScoreRegression(MixtureGaussians(test, ev.weights, 1.0), y_test);
  for (size_t m = 0; m < members.size(); ++m) {
    ev.members[m].test.regression = ScoreRegression(MixtureGaussians({test[m]}, {1.0}, 1.0), y_test);
    ev.members[m].validation_nll = ScoreRegression(MixtureGaussians({val[m]}, {1.0}, 1.0), y_val).nll;
  }
  ev.size_curve = RegressionSizeCurve(val, y_val, test, y_test, rep.size_curve_subsets, seed);
}

}  // namespace

MemberGaussian ToGaussian(const Matrix& outputs, const PreparedData& data) {
  MemberGaussian g;
  for (Eigen::Index i = 0; i < outputs.rows(); ++i) {
    g.mean.push_back(static_cast<double>(outputs(i, 0)) * data.target_scale + data.target_mean);
    g.stddev.push_back(std::exp(0.5 * static_cast<double>(outputs(i, 1))) * data.target_scale);
  }
  return g;
}

EnsembleEvaluation EvaluateEnsemble(const PreparedData& data, const std::vector<MemberResult>& members,
                                    const EnsembleConfig& ensemble, const ReportConfig& report,
                                    uint64_t seed, const Matrix* true_probabilities) {
  EnsembleEvaluation ev;
  ev.task = data.task;
  ev.weights.assign(members.size(), 1.0 / static_cast<double>(members.size()));
  for (const MemberResult& m : members) ev.members.push_back({m.index, m.seed, {}, 0.0});
  const uint64_t curve_seed = Derive(seed, "size_curve");
  if (data.task == Task::kClassification) {
    EvaluateClassification(data, members, ensemble, report, curve_seed, ev);
  } else {
    EvaluateRegression(data, members, ensemble, report, curve_seed, ev);
  }
  for (size_t m = 0; m < ev.members.size(); ++m) {
    AddScaled(ev.mean_member, ev.members[m].test, 1.0 / static_cast<double>(ev.members.size()));
    if (ev.members[m].validation_nll < ev.members[ev.best_member].validation_nll) ev.best_member = m;
  }
  if (true_probabilities != nullptr) {
    double nll = 0.0;
    for (size_t i = 0; i < data.test.labels.size(); ++i) {
      nll -= std::log(std::max(1e-300, static_cast<double>((*true_probabilities)(i, data.test.labels[i]))));
    }
    ev.bayes_optimal_test_nll = nll / static_cast<double>(data.test.labels.size());
  }
  return ev;
}

}  // namespace chorus
