#include "common/ensemble_assembly.h"

#include <cmath>

#include "common/assembly.h"
#include "common/heads.h"
#include "common/metrics.h"
#include "common/weighting.h"

namespace chorus {
namespace {

std::vector<double> LearnWeights(const EnsembleConfig& ens, const MatrixD& likelihoods) {
  const size_t m = static_cast<size_t>(likelihoods.cols());
  switch (ens.weighting) {
    case Weighting::kUniform: return std::vector<double>(m, 1.0 / static_cast<double>(m));
    case Weighting::kStacking: return StackingWeights(likelihoods).weights;
    case Weighting::kGreedy: return GreedyWeights(likelihoods, ens.greedy_rounds);
  }
  return {};
}

}  // namespace

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

AssembledMixture AssembleClassification(const MemberSamples& val,
                                        const std::vector<int32_t>& val_labels,
                                        const MemberSamples& test,
                                        const std::vector<int32_t>& test_labels,
                                        const EnsembleConfig& ens, int bins) {
  AssembledMixture a;
  const MatrixD l = ClassLikelihoods(val, val_labels);
  a.weights = LearnWeights(ens, l);
  a.validation_nll = MixtureNllFromLikelihoods(l, a.weights);
  std::vector<const Matrix*> vc, tc;
  std::vector<double> vw, tw;
  FlattenSamples(val, a.weights, &vc, &vw);
  FlattenSamples(test, a.weights, &tc, &tw);
  a.temperature = ens.tune_temperature ? TuneTemperature(vc, vw, val_labels) : ens.temperature;
  a.validation_nll_calibrated =
      ScoreClassification(MixtureProbabilities(vc, vw, a.temperature), val_labels, 1).nll;
  a.test.classification = ScoreClassification(MixtureProbabilities(tc, tw, a.temperature), test_labels, bins);
  a.test_uncalibrated.classification = ScoreClassification(MixtureProbabilities(tc, tw, 1.0), test_labels, bins);
  return a;
}

AssembledMixture AssembleRegression(const MemberSampleGaussians& val,
                                    const std::vector<double>& y_val,
                                    const MemberSampleGaussians& test,
                                    const std::vector<double>& y_test, const EnsembleConfig& ens) {
  AssembledMixture a;
  const MatrixD l = GaussianLikelihoods(val, y_val);
  a.weights = LearnWeights(ens, l);
  a.validation_nll = MixtureNllFromLikelihoods(l, a.weights);
  std::vector<const MemberGaussian*> vc, tc;
  std::vector<double> vw, tw;
  FlattenSamples(val, a.weights, &vc, &vw);
  FlattenSamples(test, a.weights, &tc, &tw);
  a.temperature = ens.tune_temperature ? TuneStddevScale(vc, vw, y_val) : ens.temperature;
  a.validation_nll_calibrated = MixtureNll(MixtureGaussians(vc, vw, a.temperature), y_val);
  a.test.regression = ScoreRegression(MixtureGaussians(tc, tw, a.temperature), y_test);
  a.test_uncalibrated.regression = ScoreRegression(MixtureGaussians(tc, tw, 1.0), y_test);
  return a;
}

}  // namespace chorus
