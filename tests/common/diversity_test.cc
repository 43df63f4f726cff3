#include "common/diversity.h"

#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <string>
#include <vector>

#include "common/rng.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace diversity_test {

using testing::MakeTempDir;
using testing::ParseReferenceOutput;
using testing::RandomProbabilities;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

TEST(DiversityTest, HandWorkedPairOfClassifiers) {
  // Rows: A = (0.9, 0.1), (0.4, 0.6); B = (0.5, 0.5), (0.2, 0.8). Top-1: A (0, 1), B (0, 1) with the
  // tie in B's first row going to class 0, so no disagreement. KL in nats (the terms evaluated
  // with Python's math.log):
  //   KL(A||B) row 0 = 0.9 ln 1.8 + 0.1 ln 0.2 = 0.368064207  row 1 = 0.4 ln 2 + 0.6 ln 0.75 = 0.104649629
  //   KL(B||A) row 0 = 0.5 ln(5/9) + 0.5 ln 5  = 0.510825624  row 1 = 0.2 ln 0.5 + 0.8 ln(4/3) = 0.091516222
  //   mean over both orders and rows = 1.075055682 / 4 = 0.268763920
  const DiversityMeasures d =
      ClassificationDiversity({MatrixD{{0.9, 0.1}, {0.4, 0.6}}, MatrixD{{0.5, 0.5}, {0.2, 0.8}}});
  EXPECT_EQ(d.components, 2);
  EXPECT_EQ(d.pairs, 1);
  EXPECT_DOUBLE_EQ(d.disagreement, 0.0);
  EXPECT_NEAR(d.mean_kl, 0.268763920, 1e-8);
}

TEST(DiversityTest, ClassificationMatchesScipy) {
  const uint64_t seed = 401;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  std::vector<MatrixD> probs;
  const std::string dir = MakeTempDir("chorus-diversity");
  std::vector<std::string> args = {"classification"};
  for (int c = 0; c < 4; ++c) {
    probs.push_back(RandomProbabilities(150, 5, &rng));
    args.push_back(dir + "/p" + std::to_string(c) + ".txt");
    WriteMatrixText(args.back(), probs.back());
  }
  auto ref = ParseReferenceOutput(RunReferenceScript("scipy_diversity.py", args));
  ASSERT_EQ(ref["mean_kl"].size(), 1u);
  ASSERT_EQ(ref["disagreement"].size(), 1u);
  const DiversityMeasures d = ClassificationDiversity(probs);
  EXPECT_EQ(d.pairs, 6);
  // Sums of 1500 terms of size ~1 in double: 1e-12 leaves room for summation order.
  EXPECT_NEAR(d.mean_kl, ref["mean_kl"][0], 1e-12);
  EXPECT_DOUBLE_EQ(d.disagreement, ref["disagreement"][0]);
  EXPECT_GT(d.disagreement, 0.1);  // random classifiers disagree often
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

TEST(DiversityTest, GaussianKlMatchesQuadrature) {
  const uint64_t seed = 402;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  std::vector<MemberGaussian> comps(3);
  const std::string dir = MakeTempDir("chorus-diversity");
  std::vector<std::string> args = {"regression"};
  for (int c = 0; c < 3; ++c) {
    MatrixD moments(20, 2);
    for (int i = 0; i < 20; ++i) {
      moments(i, 0) = 2.0 * rng.NextNormal();
      moments(i, 1) = 0.5 + rng.NextUniform();
      comps[c].mean.push_back(moments(i, 0));
      comps[c].stddev.push_back(moments(i, 1));
    }
    args.push_back(dir + "/g" + std::to_string(c) + ".txt");
    WriteMatrixText(args.back(), moments);
  }
  auto ref = ParseReferenceOutput(RunReferenceScript("scipy_diversity.py", args));
  ASSERT_EQ(ref["mean_kl"].size(), 1u);
  const DiversityMeasures d = RegressionDiversity(comps);
  EXPECT_TRUE(std::isnan(d.disagreement));
  // Quadrature asked for relative error 1e-11 per integral.
  EXPECT_NEAR(d.mean_kl, ref["mean_kl"][0], 1e-8 * ref["mean_kl"][0]);
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

TEST(DiversityTest, IdenticalComponentsHaveNoDiversity) {
  Philox rng(403);
  const MatrixD p = RandomProbabilities(50, 3, &rng);
  const DiversityMeasures d = ClassificationDiversity({p, p, p});
  EXPECT_EQ(d.pairs, 3);
  EXPECT_DOUBLE_EQ(d.disagreement, 0.0);
  EXPECT_DOUBLE_EQ(d.mean_kl, 0.0);
}

TEST(DiversityTest, SummarySeparatesMembersFromTheirSamples) {
  // Two members of two samples each: logits within a member differ a little, between members a
  // lot, so between-member diversity must exceed within-member diversity.
  const Matrix a0{{3.0f, 0.0f}, {0.0f, 2.0f}}, a1{{2.5f, 0.0f}, {0.0f, 2.5f}};
  const Matrix b0{{0.0f, 3.0f}, {2.0f, 0.0f}}, b1{{0.0f, 2.5f}, {2.5f, 0.0f}};
  const DiversitySummary s = ClassificationDiversitySummary({{&a0, &a1}, {&b0, &b1}});
  EXPECT_EQ(s.between_members.components, 2);
  EXPECT_DOUBLE_EQ(s.between_members.disagreement, 1.0);
  ASSERT_TRUE(s.within_members.has_value());
  EXPECT_DOUBLE_EQ(s.within_members->disagreement, 0.0);
  EXPECT_GT(s.between_members.mean_kl, 10.0 * s.within_members->mean_kl);
  // One sample per member: nothing to compare within.
  EXPECT_FALSE(ClassificationDiversitySummary({{&a0}, {&b0}}).within_members.has_value());
}

TEST(DiversityTest, ManyComponentsAreCapped) {
  Philox rng(404);
  std::vector<MatrixD> probs;
  for (int c = 0; c < kMaxDiversityComponents + 3; ++c) probs.push_back(RandomProbabilities(4, 2, &rng));
  const DiversityMeasures d = ClassificationDiversity(probs);
  EXPECT_EQ(d.components, kMaxDiversityComponents);
  EXPECT_EQ(d.pairs, int64_t{kMaxDiversityComponents} * (kMaxDiversityComponents - 1) / 2);
}

}  // namespace diversity_test
}  // namespace chorus
