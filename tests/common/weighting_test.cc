#include "common/weighting.h"

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <map>
#include <numeric>
#include <sstream>
#include <string>
#include <vector>

#include "common/rng.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace weighting_test {

using testing::MakeTempDir;
using testing::ParseReferenceOutput;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

// L(i, m) = u_im^a_m with u_im uniform on (0, 1]: a larger exponent makes a worse member. Column
// 3 is the average of columns 0 and 1, squared: correlated with both and worse than either.
MatrixD RandomLikelihoods(int rows, Philox* rng) {
  const double exponents[] = {1.0, 0.6, 1.5};
  MatrixD l(rows, 4);
  for (int i = 0; i < rows; ++i) {
    for (int m = 0; m < 3; ++m) l(i, m) = std::pow(1.0 - rng->NextUniform(), exponents[m]);
    l(i, 3) = std::pow(0.5 * (l(i, 0) + l(i, 1)), 2.0);
  }
  return l;
}

// The KKT gap recomputed here: max_m mean_i L(i, m) / q_i - 1, q = L w.
double KktGap(const MatrixD& l, const std::vector<double>& weights) {
  const Eigen::VectorXd q = l * Eigen::Map<const Eigen::VectorXd>(weights.data(), weights.size());
  return (l.transpose() * q.cwiseInverse()).maxCoeff() / l.rows() - 1.0;
}

double SingleMemberNll(const MatrixD& l, int m) { return -l.col(m).array().log().mean(); }

TEST(WeightingTest, MixtureNllMatchesHandComputation) {
  // q = (0.5 * 0.5 + 0.5 * 0.25, 0.5 * 0.2 + 0.5 * 0.4) = (0.375, 0.3).
  const MatrixD l{{0.5, 0.25}, {0.2, 0.4}};
  EXPECT_NEAR(MixtureNllFromLikelihoods(l, {0.5, 0.5}), -(std::log(0.375) + std::log(0.3)) / 2,
              1e-15);
}

TEST(WeightingTest, StackingGivesUninformativeMemberNoWeight) {
  // K = 3 classes. Members 0 and 1 give the true class 0.85..0.95 on their strong inputs (even
  // for member 0, odd for member 1) and 0.6..0.7 elsewhere; member 2 is uniform (1/3). With
  // q_i >= 0.6 the uniform member's gradient is at most (1/3) / 0.6 < 1: its optimal weight is
  // exactly 0, and the other two both keep a large share (0.42 and 0.58 for this seed).
  const uint64_t seed = 41;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  MatrixD l(200, 3);
  for (int i = 0; i < l.rows(); ++i) {
    const bool even = i % 2 == 0;
    l(i, 0) = (even ? 0.85 : 0.6) + 0.1 * rng.NextUniform();
    l(i, 1) = (even ? 0.6 : 0.85) + 0.1 * rng.NextUniform();
    l(i, 2) = 1.0 / 3.0;
  }
  const StackingResult r = StackingWeights(l);
  ASSERT_EQ(r.weights.size(), 3u);
  EXPECT_LT(r.weights[2], 1e-3);
  EXPECT_EQ(r.weights[2], 0.0);  // dropped from the barrier's ~1e-8 to exactly 0
  EXPECT_GT(r.weights[0], 0.3);
  EXPECT_GT(r.weights[1], 0.3);
  EXPECT_LE(r.optimality_gap, 1e-6);
}

TEST(WeightingTest, StackingMatchesScipySlsqp) {
  for (uint64_t seed : {51, 52, 53}) {
    SCOPED_TRACE("seed " + std::to_string(seed));
    Philox rng(seed);
    const MatrixD l = RandomLikelihoods(300, &rng);
    const std::string dir = MakeTempDir("chorus-stacking");
    WriteMatrixText(dir + "/likelihoods.txt", l);
    auto ref =
        ParseReferenceOutput(RunReferenceScript("scipy_stacking.py", {dir + "/likelihoods.txt"}));
    ASSERT_EQ(ref["weights"].size(), 4u);
    const StackingResult ours = StackingWeights(l, 1e-10);
    // SciPy minimize(method='SLSQP'), sum-to-one equality, bounds [0, 1], ftol 1e-15.
    for (int m = 0; m < 4; ++m) EXPECT_NEAR(ours.weights[m], ref["weights"][m], 1e-3) << m;
    EXPECT_NEAR(ours.log_score, ref["log_score"][0], 1e-7);
    EXPECT_GE(ours.log_score, ref["log_score"][0] - 1e-12);  // at least as good as SLSQP
    EXPECT_LE(ours.optimality_gap, 1e-10);
    if (!HasFailure()) std::filesystem::remove_all(dir);
  }
}

TEST(WeightingTest, StackingReportsItsOwnGapAndScore) {
  const uint64_t seed = 61;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  const MatrixD l = RandomLikelihoods(500, &rng);
  const StackingResult r = StackingWeights(l);
  EXPECT_LE(r.optimality_gap, 1e-6);
  EXPECT_NEAR(r.optimality_gap, KktGap(l, r.weights), 1e-12);
  EXPECT_NEAR(r.log_score, -MixtureNllFromLikelihoods(l, r.weights), 1e-12);
  EXPECT_NEAR(std::accumulate(r.weights.begin(), r.weights.end(), 0.0), 1.0, 1e-12);
  for (double w : r.weights) EXPECT_GE(w, 0.0);
  EXPECT_GT(r.iterations, 0);
  EXPECT_LT(r.iterations, 1000);
}

TEST(WeightingTest, StackingSingleMemberIsOptimalAtOnce) {
  const MatrixD l{{0.3}, {0.9}, {0.5}};
  const StackingResult r = StackingWeights(l);
  EXPECT_EQ(r.weights, std::vector<double>{1.0});
  EXPECT_EQ(r.iterations, 0);
  EXPECT_NEAR(r.optimality_gap, 0.0, 1e-15);
}

TEST(WeightingTest, GreedyNeverWorseThanBestMember) {
  const int rounds = 20;
  for (uint64_t seed : {71, 72, 73, 74, 75}) {
    SCOPED_TRACE("seed " + std::to_string(seed));
    Philox rng(seed);
    const MatrixD l = RandomLikelihoods(150, &rng);
    const std::vector<double> w = GreedyWeights(l, rounds);
    ASSERT_EQ(w.size(), 4u);
    double best_single = SingleMemberNll(l, 0);
    for (int m = 1; m < 4; ++m) best_single = std::min(best_single, SingleMemberNll(l, m));
    const double greedy = MixtureNllFromLikelihoods(l, w);
    EXPECT_LE(greedy, best_single + 1e-12);
    // Stacking optimises over the whole simplex, so no multiset does better.
    EXPECT_GE(greedy, -StackingWeights(l, 1e-10).log_score - 1e-12);
    EXPECT_NEAR(std::accumulate(w.begin(), w.end(), 0.0), 1.0, 1e-12);
    // Some size in 1..rounds + 1 makes every weight an integer count.
    bool counts_found = false;
    for (int size = 1; size <= rounds + 1 && !counts_found; ++size) {
      counts_found = std::all_of(w.begin(), w.end(), [size](double v) {
        return std::abs(v * size - std::round(v * size)) < 1e-9;
      });
    }
    EXPECT_TRUE(counts_found);
  }
}

TEST(WeightingTest, GreedyHandCases) {
  // Two complementary members: each alone has NLL -(ln 0.9 + ln 0.1) / 2 = 1.204 (a tie, so
  // member 0 starts); adding member 1 gives q = (0.5, 0.5), NLL ln 2 = 0.693; any third pick
  // moves q off (0.5, 0.5) and is worse, so the best round is {0, 1}.
  const MatrixD l{{0.9, 0.1}, {0.1, 0.9}};
  EXPECT_EQ(GreedyWeights(l, 5), (std::vector<double>{0.5, 0.5}));
  EXPECT_EQ(GreedyWeights(l, 0), (std::vector<double>{1.0, 0.0}));
  // Member 1 is best alone (NLL -ln 0.5 = 0.693 against 0.805) and no mixture beats it.
  const MatrixD dominated{{0.4, 0.5}, {0.5, 0.5}};
  EXPECT_EQ(GreedyWeights(dominated, 4), (std::vector<double>{0.0, 1.0}));
}

}  // namespace weighting_test
}  // namespace chorus
