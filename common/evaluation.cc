#include "common/evaluation.h"

#include <algorithm>
#include <cmath>

#include "common/heads.h"
#include "common/reliability.h"
#include "common/rng.h"
#include "common/uncertainty.h"
#include "common/weighting.h"

namespace chorus {
namespace {

constexpr int kHistogramBins = 20;

// One assembled mixture: weights per member, temperature, and its test scores.
struct Assembled {
  std::vector<double> weights;
  double validation_nll = 0;             // at T = 1
  double validation_nll_calibrated = 0;  // at the tuned T
  double temperature = 1;
  Scores test, test_uncalibrated;
};

// Flattens members' samples into one component list with weights w_m / S_m.
template <typename T>
void Flatten(const std::vector<std::vector<const T*>>& members, const std::vector<double>& w,
             std::vector<const T*>* components, std::vector<double>* component_weights) {
  for (size_t m = 0; m < members.size(); ++m) {
    for (const T* c : members[m]) {
      components->push_back(c);
      component_weights->push_back(w[m] / static_cast<double>(members[m].size()));
    }
  }
}

std::vector<double> LearnWeights(const EnsembleConfig& ens, const MatrixD& likelihoods) {
  const size_t m = static_cast<size_t>(likelihoods.cols());
  switch (ens.weighting) {
    case Weighting::kUniform: return std::vector<double>(m, 1.0 / static_cast<double>(m));
    case Weighting::kStacking: return StackingWeights(likelihoods).weights;
    case Weighting::kGreedy: return GreedyWeights(likelihoods, ens.greedy_rounds);
  }
  return {};
}

// L(i, m) = mean_s softmax(z_ms)(i, y_i): member m's validation probability of the true label.
MatrixD ClassLikelihoods(const MemberSamples& members, const std::vector<int32_t>& labels) {
  MatrixD l = MatrixD::Zero(static_cast<Eigen::Index>(labels.size()), static_cast<Eigen::Index>(members.size()));
  for (size_t m = 0; m < members.size(); ++m) {
    for (const Matrix* z : members[m]) {
      const MatrixD p = Softmax(*z);
      for (size_t i = 0; i < labels.size(); ++i) l(i, m) += p(i, labels[i]) / members[m].size();
    }
  }
  return l;
}

// L(i, m) = mean_s N(y_i; mu_ms, sigma_ms^2).
MatrixD GaussianLikelihoods(const MemberSampleGaussians& members, const std::vector<double>& y) {
  MatrixD l = MatrixD::Zero(static_cast<Eigen::Index>(y.size()), static_cast<Eigen::Index>(members.size()));
  for (size_t m = 0; m < members.size(); ++m) {
    for (const MemberGaussian* g : members[m]) {
      for (size_t i = 0; i < y.size(); ++i) {
        const double z = (y[i] - g->mean[i]) / g->stddev[i];
        l(i, m) += std::exp(-0.5 * z * z) / (g->stddev[i] * 2.5066282746310002) / members[m].size();
      }
    }
  }
  return l;
}

Assembled AssembleClassification(const MemberSamples& val, const MemberSamples& test,
                                 const PreparedData& data, const EnsembleConfig& ens, int bins) {
  Assembled a;
  const MatrixD l = ClassLikelihoods(val, data.validation.labels);
  a.weights = LearnWeights(ens, l);
  a.validation_nll = MixtureNllFromLikelihoods(l, a.weights);
  std::vector<const Matrix*> vc, tc;
  std::vector<double> vw, tw;
  Flatten(val, a.weights, &vc, &vw);
  Flatten(test, a.weights, &tc, &tw);
  a.temperature = ens.tune_temperature ? TuneTemperature(vc, vw, data.validation.labels) : ens.temperature;
  a.validation_nll_calibrated =
      ScoreClassification(MixtureProbabilities(vc, vw, a.temperature), data.validation.labels, 1).nll;
  a.test.classification = ScoreClassification(MixtureProbabilities(tc, tw, a.temperature), data.test.labels, bins);
  a.test_uncalibrated.classification = ScoreClassification(MixtureProbabilities(tc, tw, 1.0), data.test.labels, bins);
  return a;
}

Assembled AssembleRegression(const MemberSampleGaussians& val, const MemberSampleGaussians& test,
                             const std::vector<double>& y_val, const std::vector<double>& y_test,
                             const EnsembleConfig& ens) {
  Assembled a;
  const MatrixD l = GaussianLikelihoods(val, y_val);
  a.weights = LearnWeights(ens, l);
  a.validation_nll = MixtureNllFromLikelihoods(l, a.weights);
  std::vector<const MemberGaussian*> vc, tc;
  std::vector<double> vw, tw;
  Flatten(val, a.weights, &vc, &vw);
  Flatten(test, a.weights, &tc, &tw);
  a.temperature = ens.tune_temperature ? TuneStddevScale(vc, vw, y_val) : ens.temperature;
  a.validation_nll_calibrated = MixtureNll(MixtureGaussians(vc, vw, a.temperature), y_val);
  a.test.regression = ScoreRegression(MixtureGaussians(tc, tw, a.temperature), y_test);
  a.test_uncalibrated.regression = ScoreRegression(MixtureGaussians(tc, tw, 1.0), y_test);
  return a;
}

void Adopt(const Assembled& a, EnsembleEvaluation& ev) {
  ev.weights = a.weights;
  ev.validation_nll_weighted = a.validation_nll;
  ev.validation_nll_calibrated = a.validation_nll_calibrated;
  ev.temperature = a.temperature;
  ev.test = a.test;
  ev.test_uncalibrated = a.test_uncalibrated;
}

std::vector<double> Coverages() {
  std::vector<double> c;
  for (int pct = 50; pct <= 100; pct += 5) c.push_back(pct / 100.0);
  return c;
}

// Nominal levels of the regression interval-coverage diagram: 0.05, 0.10, ..., 0.95.
std::vector<double> NominalLevels() {
  std::vector<double> q;
  for (int pct = 5; pct <= 95; pct += 5) q.push_back(pct / 100.0);
  return q;
}

// Entropy split of the calibrated test mixture, and how well each part flags its errors.
void ClassificationUncertainty(const MemberSamples& test, const std::vector<double>& weights,
                               double temperature, const std::vector<int32_t>& labels,
                               UncertaintySummary& u) {
  std::vector<const Matrix*> comps;
  std::vector<double> cw;
  Flatten(test, weights, &comps, &cw);
  std::vector<MatrixD> probs;
  for (const Matrix* z : comps) probs.push_back(Softmax(*z, temperature));
  const UncertaintySplit split = SplitEntropy(probs, cw);
  const MatrixD mixture = MixtureProbabilities(comps, cw, temperature);
  std::vector<bool> wrong(labels.size()), correct(labels.size());
  std::vector<double> confidence(labels.size());
  for (size_t i = 0; i < labels.size(); ++i) {
    Eigen::Index arg = 0;
    confidence[i] = mixture.row(i).maxCoeff(&arg);
    correct[i] = arg == labels[i];
    wrong[i] = !correct[i];
  }
  const double n = static_cast<double>(labels.size());
  for (size_t i = 0; i < labels.size(); ++i) {
    u.total += split.total[i] / n;
    u.aleatoric += split.aleatoric[i] / n;
    u.epistemic += split.epistemic[i] / n;
  }
  u.auroc_total = Auroc(split.total, wrong);
  u.auroc_aleatoric = Auroc(split.aleatoric, wrong);
  u.auroc_epistemic = Auroc(split.epistemic, wrong);
  u.coverages = Coverages();
  u.selective_accuracy = SelectiveAccuracy(confidence, correct, u.coverages);
  u.epistemic_histogram = HistogramByOutcome(split.epistemic, correct, kHistogramBins);
}

// Reliability diagrams of the weighted test mixture at T = 1 and at the tuned T.
void ClassificationReliability(const MemberSamples& test, const std::vector<int32_t>& labels,
                               int bins, EnsembleEvaluation& ev) {
  std::vector<const Matrix*> comps;
  std::vector<double> cw;
  Flatten(test, ev.weights, &comps, &cw);
  ev.reliability = ReliabilityBins(MixtureProbabilities(comps, cw, ev.temperature), labels, bins);
  ev.reliability_uncalibrated = ReliabilityBins(MixtureProbabilities(comps, cw, 1.0), labels, bins);
}

// Variance split of the calibrated test mixture, its epistemic histogram (hits: targets inside
// the 90% interval, from the PIT) and selective RMSE ranked by total variance.
void RegressionUncertainty(const GaussianMixture& calibrated, const std::vector<double>& pit,
                           const std::vector<double>& y, UncertaintySummary& u) {
  const UncertaintySplit split = SplitVariance(calibrated);
  const size_t n = y.size();
  std::vector<double> epistemic_std(n), errors(n);
  std::vector<bool> inside(n);
  for (size_t i = 0; i < n; ++i) {
    u.total += split.total[i] / static_cast<double>(n);
    u.aleatoric += split.aleatoric[i] / static_cast<double>(n);
    u.epistemic += split.epistemic[i] / static_cast<double>(n);
    epistemic_std[i] = std::sqrt(split.epistemic[i]);
    inside[i] = std::abs(pit[i] - 0.5) <= 0.45;
    double mean = 0;
    for (size_t m = 0; m < calibrated.weights.size(); ++m) {
      mean += calibrated.weights[m] * calibrated.mean(static_cast<Eigen::Index>(i), m);
    }
    errors[i] = y[i] - mean;
  }
  u.epistemic_histogram = HistogramByOutcome(epistemic_std, inside, kHistogramBins);
  u.coverages = Coverages();
  u.selective_rmse = SelectiveRmse(split.total, errors, u.coverages);
}

// Interval coverage of the weighted test mixture at scale 1 and at the tuned scale, and the
// uncertainty summary of the calibrated one.
void RegressionCalibration(const MemberSampleGaussians& test, const std::vector<double>& y,
                           EnsembleEvaluation& ev) {
  std::vector<const MemberGaussian*> comps;
  std::vector<double> cw;
  Flatten(test, ev.weights, &comps, &cw);
  const GaussianMixture calibrated = MixtureGaussians(comps, cw, ev.temperature);
  const std::vector<double> pit = MixturePit(calibrated, y);
  ev.interval_coverage = IntervalCoverages(pit, NominalLevels());
  ev.interval_coverage_uncalibrated =
      IntervalCoverages(MixturePit(MixtureGaussians(comps, cw, 1.0), y), NominalLevels());
  RegressionUncertainty(calibrated, pit, y, ev.uncertainty);
}

MemberSamples Points(const std::vector<MemberResult>& members, bool validation) {
  MemberSamples out;
  for (const MemberResult& m : members) out.push_back({validation ? &m.validation_outputs : &m.test_outputs});
  return out;
}

void EvaluateClassification(const PreparedData& data, const std::vector<MemberResult>& members,
                            const EnsembleConfig& ens, const ReportConfig& rep, uint64_t seed,
                            EnsembleEvaluation& ev) {
  MemberSamples val, test;
  for (const MemberResult& m : members) {
    val.push_back(m.ValidationSamples());
    test.push_back(m.TestSamples());
  }
  Adopt(AssembleClassification(val, test, data, ens, rep.ece_bins), ev);
  if (ens.basin.method != BasinMethod::kNone) {
    ev.test_without_basin = AssembleClassification(Points(members, true), Points(members, false), data, ens,
                                                   rep.ece_bins).test;
  }
  const MatrixD l = ClassLikelihoods(val, data.validation.labels);
  for (size_t m = 0; m < members.size(); ++m) {
    const std::vector<double> uniform(test[m].size(), 1.0 / static_cast<double>(test[m].size()));
    MemberScores& s = ev.members[m];
    s.samples = static_cast<int>(test[m].size());
    s.test.classification = ScoreClassification(MixtureProbabilities(test[m], uniform, 1.0), data.test.labels, rep.ece_bins);
    s.test_point.classification = ScoreClassification(Softmax(members[m].test_outputs), data.test.labels, rep.ece_bins);
    s.validation_nll = -l.col(static_cast<Eigen::Index>(m)).array().max(1e-300).log().mean();
  }
  ClassificationUncertainty(test, ev.weights, ev.temperature, data.test.labels, ev.uncertainty);
  ClassificationReliability(test, data.test.labels, rep.ece_bins, ev);
  ev.size_curve = ClassificationSizeGrid(val, data.validation.labels, test, data.test.labels,
                                         rep.size_curve_subsets, rep.ece_bins, seed);
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
                        EnsembleEvaluation& ev) {
  const GaussianViews val_g = ToGaussians(members, data, true), test_g = ToGaussians(members, data, false);
  const MemberSampleGaussians val = val_g.SamplePointers(), test = test_g.SamplePointers();
  const std::vector<double> y_val = OriginalTargets(data.validation, data);
  const std::vector<double> y_test = OriginalTargets(data.test, data);
  Adopt(AssembleRegression(val, test, y_val, y_test, ens), ev);
  if (ens.basin.method != BasinMethod::kNone) {
    ev.test_without_basin = AssembleRegression(val_g.PointPointers(), test_g.PointPointers(), y_val, y_test, ens).test;
  }
  const MatrixD l = GaussianLikelihoods(val, y_val);
  for (size_t m = 0; m < members.size(); ++m) {
    const std::vector<double> uniform(test[m].size(), 1.0 / static_cast<double>(test[m].size()));
    MemberScores& s = ev.members[m];
    s.samples = static_cast<int>(test[m].size());
    s.test.regression = ScoreRegression(MixtureGaussians(test[m], uniform, 1.0), y_test);
    s.test_point.regression = ScoreRegression(MixtureGaussians({&test_g.points[m]}, {1.0}, 1.0), y_test);
    s.validation_nll = -l.col(static_cast<Eigen::Index>(m)).array().max(1e-300).log().mean();
  }
  RegressionCalibration(test, y_test, ev);
  ev.size_curve = RegressionSizeGrid(val, y_val, test, y_test, rep.size_curve_subsets, seed);
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
  ev.weighting = ensemble.weighting;
  ev.tuned_temperature = ensemble.tune_temperature;
  for (const MemberResult& m : members) ev.members.push_back({m.index, m.seed, 1, {}, {}, 0.0});
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
