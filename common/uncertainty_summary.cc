#include "common/uncertainty_summary.h"

#include <cmath>

#include "common/assembly.h"
#include "common/ensemble_assembly.h"
#include "common/heads.h"
#include "common/reliability.h"
#include "common/uncertainty.h"

namespace chorus {
namespace {

constexpr int kHistogramBins = 20;

std::vector<double> Coverages() {
  std::vector<double> c;
  for (int pct = 50; pct <= 100; pct += 5) c.push_back(pct / 100.0);
  return c;
}

}  // namespace

UncertaintySummary ClassificationUncertaintySummary(const MemberSamples& test,
                                                    const std::vector<double>& weights,
                                                    double temperature,
                                                    const std::vector<int32_t>& labels) {
  UncertaintySummary u;
  std::vector<const Matrix*> comps;
  std::vector<double> cw;
  FlattenSamples(test, weights, &comps, &cw);
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
  return u;
}

UncertaintySummary RegressionUncertaintySummary(const GaussianMixture& calibrated,
                                                const std::vector<double>& pit,
                                                const std::vector<double>& y) {
  UncertaintySummary u;
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
  return u;
}

}  // namespace chorus
