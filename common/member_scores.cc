#include "common/member_scores.h"

#include "common/heads.h"
#include "common/metrics.h"

namespace chorus {
namespace {

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

double ValidationNll(const MatrixD& likelihoods, size_t m) {
  return -likelihoods.col(static_cast<Eigen::Index>(m)).array().max(1e-300).log().mean();
}

}  // namespace

void ScoreClassificationMembers(const MemberSamples& test, const std::vector<MemberResult>& members,
                                const std::vector<int32_t>& test_labels, const MatrixD& l,
                                int bins, std::vector<MemberScores>& scores) {
  for (size_t m = 0; m < members.size(); ++m) {
    const std::vector<double> uniform(test[m].size(), 1.0 / static_cast<double>(test[m].size()));
    MemberScores& s = scores[m];
    s.samples = static_cast<int>(test[m].size());
    s.test.classification = ScoreClassification(MixtureProbabilities(test[m], uniform, 1.0), test_labels, bins);
    s.test_point.classification = ScoreClassification(Softmax(members[m].test_outputs), test_labels, bins);
    s.validation_nll = ValidationNll(l, m);
  }
}

void ScoreRegressionMembers(const MemberSampleGaussians& test,
                            const std::vector<MemberGaussian>& test_points,
                            const std::vector<double>& y_test, const MatrixD& l,
                            std::vector<MemberScores>& scores) {
  for (size_t m = 0; m < test_points.size(); ++m) {
    const std::vector<double> uniform(test[m].size(), 1.0 / static_cast<double>(test[m].size()));
    MemberScores& s = scores[m];
    s.samples = static_cast<int>(test[m].size());
    s.test.regression = ScoreRegression(MixtureGaussians(test[m], uniform, 1.0), y_test);
    s.test_point.regression = ScoreRegression(MixtureGaussians({&test_points[m]}, {1.0}, 1.0), y_test);
    s.validation_nll = ValidationNll(l, m);
  }
}

Scores MeanMemberScores(const std::vector<MemberScores>& members) {
  Scores mean;
  for (const MemberScores& m : members) {
    AddScaled(mean, m.test, 1.0 / static_cast<double>(members.size()));
  }
  return mean;
}

int BestMember(const std::vector<MemberScores>& members) {
  int best = 0;
  for (size_t m = 0; m < members.size(); ++m) {
    if (members[m].validation_nll < members[best].validation_nll) best = static_cast<int>(m);
  }
  return best;
}

}  // namespace chorus
