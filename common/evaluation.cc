#include "common/evaluation.h"

#include <algorithm>
#include <chrono>
#include <cmath>

#include "common/ensemble_assembly.h"
#include "common/member_scores.h"
#include "common/reliability.h"
#include "common/rng.h"
#include "common/uncertainty_summary.h"

namespace chorus {
namespace {

void Adopt(const AssembledMixture& a, EnsembleEvaluation& ev) {
  ev.weights = a.weights;
  ev.validation_nll_weighted = a.validation_nll;
  ev.validation_nll_calibrated = a.validation_nll_calibrated;
  ev.temperature = a.temperature;
  ev.test = a.test;
  ev.test_uncalibrated = a.test_uncalibrated;
}

// Nominal levels of the regression interval-coverage diagram: 0.05, 0.10, ..., 0.95.
std::vector<double> NominalLevels() {
  std::vector<double> q;
  for (int pct = 5; pct <= 95; pct += 5) q.push_back(pct / 100.0);
  return q;
}

// Reliability diagrams of the weighted test mixture at T = 1 and at the tuned T.
void ClassificationReliability(const MemberSamples& test, const std::vector<int32_t>& labels,
                               int bins, EnsembleEvaluation& ev) {
  std::vector<const Matrix*> comps;
  std::vector<double> cw;
  FlattenSamples(test, ev.weights, &comps, &cw);
  ev.reliability = ReliabilityBins(MixtureProbabilities(comps, cw, ev.temperature), labels, bins);
  ev.reliability_uncalibrated = ReliabilityBins(MixtureProbabilities(comps, cw, 1.0), labels, bins);
}

// Interval coverage of the weighted test mixture at scale 1 and at the tuned scale, and the
// uncertainty summary of the calibrated one.
void RegressionCalibration(const MemberSampleGaussians& test, const std::vector<double>& y,
                           EnsembleEvaluation& ev) {
  std::vector<const MemberGaussian*> comps;
  std::vector<double> cw;
  FlattenSamples(test, ev.weights, &comps, &cw);
  const GaussianMixture calibrated = MixtureGaussians(comps, cw, ev.temperature);
  const std::vector<double> pit = MixturePit(calibrated, y);
  ev.interval_coverage = IntervalCoverages(pit, NominalLevels());
  ev.interval_coverage_uncalibrated =
      IntervalCoverages(MixturePit(MixtureGaussians(comps, cw, 1.0), y), NominalLevels());
  ev.uncertainty = RegressionUncertaintySummary(calibrated, pit, y);
}

MemberSamples Points(const std::vector<MemberResult>& members, bool validation) {
  MemberSamples out;
  for (const MemberResult& m : members) out.push_back({validation ? &m.validation_outputs : &m.test_outputs});
  return out;
}

void EvaluateClassification(const PreparedData& data, const std::vector<MemberResult>& members,
                            const EnsembleConfig& ens, const ReportConfig& rep, uint64_t seed,
                            const ParallelFor* parallel, EnsembleEvaluation& ev) {
  MemberSamples val, test;
  for (const MemberResult& m : members) {
    val.push_back(m.ValidationSamples());
    test.push_back(m.TestSamples());
  }
  const std::vector<int32_t>& y_val = data.validation.labels;
  const std::vector<int32_t>& y_test = data.test.labels;
  Adopt(AssembleClassification(val, y_val, test, y_test, ens, rep.ece_bins), ev);
  if (ens.basin.method != BasinMethod::kNone) {
    ev.test_without_basin = AssembleClassification(Points(members, true), y_val,
                                                   Points(members, false), y_test, ens,
                                                   rep.ece_bins).test;
  }
  ScoreClassificationMembers(test, members, y_test, ClassLikelihoods(val, y_val), rep.ece_bins,
                             ev.members);
  ev.uncertainty = ClassificationUncertaintySummary(test, ev.weights, ev.temperature, y_test);
  ev.diversity = ClassificationDiversitySummary(test);
  ClassificationReliability(test, y_test, rep.ece_bins, ev);
  const auto curve_start = std::chrono::steady_clock::now();
  ev.size_curve = ClassificationSizeGrid(val, y_val, test, y_test, rep.size_curve_subsets,
                                         rep.ece_bins, seed, parallel);
  ev.size_curve_seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - curve_start).count();
}

std::vector<double> OriginalTargets(const Split& split, const PreparedData& data) {
  std::vector<double> y(split.targets.size());
  for (size_t i = 0; i < y.size(); ++i) {
    y[i] = static_cast<double>(split.targets[i]) * data.target_scale + data.target_mean;
  }
  return y;
}

// Gaussians of every sample (and of the trained point) of every member, on one split.
struct GaussianViews {
  std::vector<std::vector<MemberGaussian>> samples;
  std::vector<MemberGaussian> points;
  MemberSampleGaussians SamplePointers() const {
    MemberSampleGaussians out(samples.size());
    for (size_t m = 0; m < samples.size(); ++m) {
      for (const MemberGaussian& g : samples[m]) out[m].push_back(&g);
    }
    return out;
  }
  MemberSampleGaussians PointPointers() const {
    MemberSampleGaussians out;
    for (const MemberGaussian& g : points) out.push_back({&g});
    return out;
  }
};

GaussianViews ToGaussians(const std::vector<MemberResult>& members, const PreparedData& data, bool validation) {
  GaussianViews v;
  for (const MemberResult& m : members) {
    v.points.push_back(ToGaussian(validation ? m.validation_outputs : m.test_outputs, data));
    v.samples.emplace_back();
    for (const Matrix* z : validation ? m.ValidationSamples() : m.TestSamples()) {
      v.samples.back().push_back(ToGaussian(*z, data));
    }
  }
  return v;
}

void EvaluateRegression(const PreparedData& data, const std::vector<MemberResult>& members,
                        const EnsembleConfig& ens, const ReportConfig& rep, uint64_t seed,
                        const ParallelFor* parallel, EnsembleEvaluation& ev) {
  const GaussianViews val_g = ToGaussians(members, data, true), test_g = ToGaussians(members, data, false);
  const MemberSampleGaussians val = val_g.SamplePointers(), test = test_g.SamplePointers();
  const std::vector<double> y_val = OriginalTargets(data.validation, data);
  const std::vector<double> y_test = OriginalTargets(data.test, data);
  Adopt(AssembleRegression(val, y_val, test, y_test, ens), ev);
  if (ens.basin.method != BasinMethod::kNone) {
    ev.test_without_basin = AssembleRegression(val_g.PointPointers(), y_val,
                                               test_g.PointPointers(), y_test, ens).test;
  }
  ScoreRegressionMembers(test, test_g.points, y_test, GaussianLikelihoods(val, y_val), ev.members);
  RegressionCalibration(test, y_test, ev);
  ev.diversity = RegressionDiversitySummary(test);
  const auto curve_start = std::chrono::steady_clock::now();
  ev.size_curve = RegressionSizeGrid(val, y_val, test, y_test, rep.size_curve_subsets, seed,
                                     parallel);
  ev.size_curve_seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - curve_start).count();
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
                                    uint64_t seed, const Matrix* true_probabilities,
                                    const ParallelFor* parallel) {
  EnsembleEvaluation ev;
  ev.task = data.task;
  ev.weighting = ensemble.weighting;
  ev.tuned_temperature = ensemble.tune_temperature;
  for (const MemberResult& m : members) ev.members.push_back({m.index, m.seed, 1, {}, {}, 0.0});
  const uint64_t curve_seed = Derive(seed, "size_curve");
  if (data.task == Task::kClassification) {
    EvaluateClassification(data, members, ensemble, report, curve_seed, parallel, ev);
  } else {
    EvaluateRegression(data, members, ensemble, report, curve_seed, parallel, ev);
  }
  ev.mean_member = MeanMemberScores(ev.members);
  ev.best_member = BestMember(ev.members);
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
