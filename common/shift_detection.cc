#include "common/shift_detection.h"

#include <cmath>
#include <limits>

#include "common/heads.h"
#include "common/uncertainty.h"

namespace chorus {
namespace {

constexpr double kNotApplicable = std::numeric_limits<double>::quiet_NaN();

// Scores of the test rows followed by the shifted rows, and which are shifted.
struct Pooled {
  std::vector<double> score;
  std::vector<bool> shifted;
};

Pooled Pool(const std::vector<double>& test, const std::vector<double>& shifted) {
  Pooled p{test, std::vector<bool>(test.size(), false)};
  p.score.insert(p.score.end(), shifted.begin(), shifted.end());
  p.shifted.resize(p.score.size(), true);
  return p;
}

double PooledAuroc(const std::vector<double>& test, const std::vector<double>& shifted) {
  const Pooled p = Pool(test, shifted);
  return Auroc(p.score, p.shifted);
}

double Mean(const std::vector<double>& v) {
  double sum = 0.0;
  for (double x : v) sum += x;
  return sum / static_cast<double>(v.size());
}

std::vector<MatrixD> ComponentProbabilities(const std::vector<const Matrix*>& logits, double temperature) {
  std::vector<MatrixD> probs;
  for (const Matrix* z : logits) probs.push_back(Softmax(*z, temperature));
  return probs;
}

std::vector<double> OneMinusMaxProbability(const std::vector<MatrixD>& probs, const std::vector<double>& weights) {
  MatrixD mixture = weights[0] * probs[0];
  for (size_t c = 1; c < probs.size(); ++c) mixture += weights[c] * probs[c];
  std::vector<double> score(mixture.rows());
  for (Eigen::Index i = 0; i < mixture.rows(); ++i) score[i] = 1.0 - mixture.row(i).maxCoeff();
  return score;
}

std::vector<double> Sqrt(std::vector<double> v) {
  for (double& x : v) x = std::sqrt(x);
  return v;
}

}  // namespace

ShiftAurocs ClassificationShiftAurocs(const std::vector<const Matrix*>& components_test,
                                      const std::vector<const Matrix*>& components_shifted,
                                      const std::vector<double>& weights, double temperature) {
  const std::vector<MatrixD> test = ComponentProbabilities(components_test, temperature);
  const std::vector<MatrixD> shifted = ComponentProbabilities(components_shifted, temperature);
  const UncertaintySplit split_test = SplitEntropy(test, weights);
  const UncertaintySplit split_shifted = SplitEntropy(shifted, weights);
  ShiftAurocs a;
  a.entropy = PooledAuroc(split_test.total, split_shifted.total);
  a.mutual_information = components_test.size() > 1
                             ? PooledAuroc(split_test.epistemic, split_shifted.epistemic)
                             : kNotApplicable;
  a.max_probability = PooledAuroc(OneMinusMaxProbability(test, weights), OneMinusMaxProbability(shifted, weights));
  a.total_std = a.epistemic_std = kNotApplicable;
  a.mean_score_test = Mean(split_test.total);
  a.mean_score_shifted = Mean(split_shifted.total);
  return a;
}

ShiftAurocs RegressionShiftAurocs(const std::vector<const MemberGaussian*>& components_test,
                                  const std::vector<const MemberGaussian*>& components_shifted,
                                  const std::vector<double>& weights, double scale) {
  const UncertaintySplit test = SplitVariance(MixtureGaussians(components_test, weights, scale));
  const UncertaintySplit shifted = SplitVariance(MixtureGaussians(components_shifted, weights, scale));
  ShiftAurocs a;
  a.entropy = a.mutual_information = a.max_probability = kNotApplicable;
  a.total_std = PooledAuroc(Sqrt(test.total), Sqrt(shifted.total));
  a.epistemic_std = components_test.size() > 1 ? PooledAuroc(Sqrt(test.epistemic), Sqrt(shifted.epistemic))
                                               : kNotApplicable;
  a.mean_score_test = Mean(Sqrt(test.total));
  a.mean_score_shifted = Mean(Sqrt(shifted.total));
  return a;
}

}  // namespace chorus
