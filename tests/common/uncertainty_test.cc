#include "common/uncertainty.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "common/rng.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace uncertainty_test {

using testing::MakeTempDir;
using testing::RandomProbabilities;
using testing::ParseReferenceOutput;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

TEST(UncertaintyTest, EntropySplitOfHandWorkedPair) {
  // A = (0.9, 0.1), B = (0.5, 0.5), weights 1/2: mixture (0.7, 0.3). In nats (mpmath, 30 digits):
  //   total     = -(0.7 ln 0.7 + 0.3 ln 0.3)           = 0.610864302054893463
  //   H[A]      = -(0.9 ln 0.9 + 0.1 ln 0.1)           = 0.325082973391448240
  //   H[B]      = ln 2                                  = 0.693147180559945309
  //   aleatoric = (H[A] + H[B]) / 2                     = 0.509115076975696774
  //   epistemic = total - aleatoric                     = 0.101749225079196689
  const UncertaintySplit s = SplitEntropy({MatrixD{{0.9, 0.1}}, MatrixD{{0.5, 0.5}}}, {0.5, 0.5});
  ASSERT_EQ(s.total.size(), 1u);
  EXPECT_NEAR(s.total[0], 0.610864302054893463, 1e-14);
  EXPECT_NEAR(s.aleatoric[0], 0.509115076975696774, 1e-14);
  EXPECT_NEAR(s.epistemic[0], 0.101749225079196689, 1e-14);
}

TEST(UncertaintyTest, EntropyMatchesScipy) {
  const uint64_t seed = 91;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  MatrixD p = RandomProbabilities(100, 5, &rng);
  p(0, 3) = 0;  // a zero probability: 0 ln 0 = 0, as in SciPy
  p.row(0) /= p.row(0).sum();
  const std::string dir = MakeTempDir("chorus-entropy");
  WriteMatrixText(dir + "/probs.txt", p);
  auto ref = ParseReferenceOutput(RunReferenceScript("scipy_entropy.py", {dir + "/probs.txt"}));
  ASSERT_EQ(ref["entropy"].size(), 100u);
  // One component: total = aleatoric = H[p]; scipy.stats.entropy(p, axis=1) in nats.
  const UncertaintySplit s = SplitEntropy({p}, {1.0});
  for (int i = 0; i < 100; ++i) {
    EXPECT_NEAR(s.total[i], ref["entropy"][i], 1e-12) << "input " << i;
    EXPECT_NEAR(s.aleatoric[i], ref["entropy"][i], 1e-12) << "input " << i;
  }
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

TEST(UncertaintyTest, EntropyPartsAddUpAndVanishForIdenticalMembers) {
  const uint64_t seed = 92;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  std::vector<MatrixD> members;
  for (int c = 0; c < 3; ++c) members.push_back(RandomProbabilities(200, 4, &rng));
  const std::vector<double> weights = {0.2, 0.3, 0.5};
  const UncertaintySplit s = SplitEntropy(members, weights);
  const UncertaintySplit same = SplitEntropy({members[0], members[0], members[0]}, weights);
  for (int i = 0; i < 200; ++i) {
    EXPECT_NEAR(s.total[i], s.aleatoric[i] + s.epistemic[i], 1e-12) << "input " << i;
    EXPECT_GT(s.epistemic[i], 0.0) << "input " << i;  // different members disagree
    EXPECT_LE(same.epistemic[i], 1e-15) << "input " << i;
    EXPECT_GE(same.epistemic[i], 0.0) << "input " << i;
  }
}

TEST(UncertaintyTest, VarianceSplitOfHandWorkedMixture) {
  // Input 0: means (1, 3), sd (1, 2), weights (1/4, 3/4). mu = 0.25 + 2.25 = 2.5;
  //   aleatoric = 0.25 * 1 + 0.75 * 4 = 3.25; epistemic = 0.25 * 1.5^2 + 0.75 * 0.5^2 = 0.75.
  // Input 1: means (0, 0), sd (2, 2): aleatoric 4, epistemic 0.
  const GaussianMixture mix{
      MatrixD{{1.0, 3.0}, {0.0, 0.0}}, MatrixD{{1.0, 2.0}, {2.0, 2.0}}, {0.25, 0.75}};
  const UncertaintySplit s = SplitVariance(mix);
  EXPECT_NEAR(s.aleatoric[0], 3.25, 1e-15);
  EXPECT_NEAR(s.epistemic[0], 0.75, 1e-15);
  EXPECT_NEAR(s.total[0], 4.0, 1e-15);
  EXPECT_EQ(s.aleatoric[1], 4.0);
  EXPECT_EQ(s.epistemic[1], 0.0);
  EXPECT_EQ(s.total[1], 4.0);
}

TEST(UncertaintyTest, AurocMatchesScikitLearnWithTies) {
  for (uint64_t seed : {101, 102, 103}) {
    SCOPED_TRACE("seed " + std::to_string(seed));
    Philox rng(seed);
    const int n = 400;
    // Scores on a grid of 11 values (many ties); P(positive) rises with the score.
    std::vector<double> score(n);
    std::vector<bool> positive(n);
    MatrixD score_col(n, 1), label_col(n, 1);
    for (int i = 0; i < n; ++i) {
      score[i] = std::round(10.0 * rng.NextUniform()) / 10.0;
      positive[i] = rng.NextUniform() < 0.2 + 0.6 * score[i];
      score_col(i, 0) = score[i];
      label_col(i, 0) = positive[i] ? 1.0 : 0.0;
    }
    const std::string dir = MakeTempDir("chorus-auroc");
    WriteMatrixText(dir + "/scores.txt", score_col);
    WriteMatrixText(dir + "/labels.txt", label_col);
    auto ref = ParseReferenceOutput(
        RunReferenceScript("sklearn_auroc.py", {dir + "/scores.txt", dir + "/labels.txt"}));
    ASSERT_EQ(ref["auroc"].size(), 1u);
    // scikit-learn roc_auc_score(labels, scores).
    EXPECT_NEAR(Auroc(score, positive), ref["auroc"][0], 1e-12);
    if (!HasFailure()) std::filesystem::remove_all(dir);
  }
}

TEST(UncertaintyTest, AurocHandCasesAndSingleClass) {
  // scikit-learn's roc_auc_score docstring example: 3 of the 4 positive-negative pairs ordered.
  EXPECT_DOUBLE_EQ(Auroc({0.1, 0.4, 0.35, 0.8}, {false, false, true, true}), 0.75);
  EXPECT_DOUBLE_EQ(Auroc({0.5, 0.5, 0.5}, {true, false, false}), 0.5);  // all ties: 1/2 each
  EXPECT_DOUBLE_EQ(Auroc({0.9, 0.1}, {false, true}), 0.0);
  EXPECT_TRUE(std::isnan(Auroc({0.2, 0.7}, {true, true})));
  EXPECT_TRUE(std::isnan(Auroc({0.2, 0.7}, {false, false})));
  EXPECT_TRUE(std::isnan(Auroc({}, {})));
}

TEST(UncertaintyTest, SelectiveAccuracyHandCases) {
  // By confidence: 0.95 right, 0.9 right, 0.8 wrong, 0.7 right, 0.6 wrong, 0.5 wrong.
  const std::vector<double> confidence = {0.6, 0.9, 0.7, 0.8, 0.5, 0.95};
  const std::vector<bool> correct = {false, true, true, false, false, true};
  // Coverage 1/6: top 1 -> 1/1; 0.5: top 3 -> 2/3; 1.0: all 6 -> 3/6.
  const std::vector<double> acc = SelectiveAccuracy(confidence, correct, {1.0 / 6, 0.5, 1.0});
  ASSERT_EQ(acc.size(), 3u);
  EXPECT_DOUBLE_EQ(acc[0], 1.0);
  EXPECT_DOUBLE_EQ(acc[1], 2.0 / 3.0);
  EXPECT_DOUBLE_EQ(acc[2], 0.5);
  // Equal confidence: input order decides, so coverage 0.5 keeps the first two.
  EXPECT_DOUBLE_EQ(SelectiveAccuracy({0.5, 0.5, 0.5, 0.5}, {true, true, false, false}, {0.5})[0],
                   1.0);
  // 0.07 * 100 = 7.000000000000001 in doubles: the top 7 (all right), not the top 8.
  std::vector<double> ranked(100);
  std::vector<bool> right(100, false);
  for (int i = 0; i < 100; ++i) ranked[i] = 1.0 - i / 100.0, right[i] = i < 7;
  EXPECT_DOUBLE_EQ(SelectiveAccuracy(ranked, right, {0.07})[0], 1.0);
}

TEST(UncertaintyTest, SelectiveAccuracyFallsWithCoverageWhenConfidenceIsInformative) {
  // Confidence c ~ U(0, 1) and P(correct | c) = c: the top fraction f has c ~ U(1 - f, 1), so
  // its expected accuracy is 1 - f / 2.
  const uint64_t seed = 111;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  const int n = 20000;
  std::vector<double> confidence(n);
  std::vector<bool> correct(n);
  for (int i = 0; i < n; ++i) {
    confidence[i] = rng.NextUniform();
    correct[i] = rng.NextUniform() < confidence[i];
  }
  const std::vector<double> coverages = {0.1, 0.2, 0.4, 0.6, 0.8, 1.0};
  const std::vector<double> acc = SelectiveAccuracy(confidence, correct, coverages);
  for (size_t j = 0; j < coverages.size(); ++j) {
    EXPECT_NEAR(acc[j], 1.0 - coverages[j] / 2, 0.02) << "coverage " << coverages[j];
    if (j > 0) {
      EXPECT_LT(acc[j], acc[j - 1]) << "coverage " << coverages[j];
    }
  }
}

}  // namespace uncertainty_test
}  // namespace chorus
