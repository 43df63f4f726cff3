#include "common/reliability.h"

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
namespace reliability_test {

using testing::ParseReferenceOutput;

GaussianMixture OneInputMixture(std::vector<double> means, std::vector<double> stddevs,
                                std::vector<double> weights, int inputs) {
  GaussianMixture m;
  m.mean = MatrixD(inputs, static_cast<Eigen::Index>(means.size()));
  m.stddev = MatrixD(inputs, static_cast<Eigen::Index>(means.size()));
  for (int i = 0; i < inputs; ++i) {
    for (size_t c = 0; c < means.size(); ++c) m.mean(i, c) = means[c], m.stddev(i, c) = stddevs[c];
  }
  m.weights = std::move(weights);
  return m;
}

TEST(ReliabilityTest, BinsMatchAHandComputedDiagramAndItsEce) {
  MatrixD probs(4, 2);
  probs << 0.9, 0.1,  // confidence 0.9, class 0: right
      0.6, 0.4,       // 0.6, class 0: wrong
      0.3, 0.7,       // 0.7, class 1: right
      0.5, 0.5;       // 0.5, tie goes to class 0: right
  const std::vector<int32_t> labels = {0, 1, 1, 0};
  // Bins (0, 1/3], (1/3, 2/3], (2/3, 1]: {} {0.6 wrong, 0.5 right} {0.9 right, 0.7 right}.
  const std::vector<ReliabilityBin> bins = ReliabilityBins(probs, labels, 3);
  ASSERT_EQ(bins.size(), 3u);
  EXPECT_EQ(bins[0].count, 0);
  EXPECT_EQ(bins[0].confidence, 0.0);
  EXPECT_EQ(bins[1].count, 2);
  EXPECT_NEAR(bins[1].confidence, 0.55, 1e-15);
  EXPECT_NEAR(bins[1].accuracy, 0.5, 1e-15);
  EXPECT_EQ(bins[2].count, 2);
  EXPECT_NEAR(bins[2].confidence, 0.8, 1e-15);
  EXPECT_NEAR(bins[2].accuracy, 1.0, 1e-15);
  EXPECT_NEAR(bins[1].lower, 1.0 / 3, 1e-15);
  EXPECT_NEAR(bins[2].upper, 1.0, 1e-15);
  // ECE = 2/4 |0.5 - 0.55| + 2/4 |1 - 0.8| = 0.125, the same as common/metrics.h computes.
  double ece = 0;
  for (const ReliabilityBin& b : bins) ece += b.count / 4.0 * std::abs(b.accuracy - b.confidence);
  EXPECT_NEAR(ece, 0.125, 1e-15);
  EXPECT_NEAR(ExpectedCalibrationError(probs, labels, 3), ece, 1e-15);
}

TEST(ReliabilityTest, BinsMatchScikitLearnCalibrationCurve) {
  const uint64_t seed = 314;
  SCOPED_TRACE("seed " + std::to_string(seed));
  Philox rng(seed);
  MatrixD probs(500, 4), labels(500, 1);
  std::vector<int32_t> label_vector;
  for (int i = 0; i < 500; ++i) {
    for (int k = 0; k < 4; ++k) probs(i, k) = std::exp(1.5 * rng.NextNormal());
    probs.row(i) /= probs.row(i).sum();
    label_vector.push_back(static_cast<int32_t>(rng.NextBelow(4)));
    labels(i, 0) = label_vector.back();
  }
  const std::string dir = testing::MakeTempDir("chorus-reliability");
  testing::WriteMatrixText(dir + "/probs.txt", probs);
  testing::WriteMatrixText(dir + "/labels.txt", labels);
  // scikit-learn calibration_curve(correct, confidence, n_bins=10, strategy="uniform").
  auto ref = ParseReferenceOutput(testing::RunReferenceScript(
      "sklearn_calibration_curve.py", {dir + "/probs.txt", dir + "/labels.txt", "10"}));
  std::vector<ReliabilityBin> filled;
  for (const ReliabilityBin& b : ReliabilityBins(probs, label_vector, 10)) {
    if (b.count > 0) filled.push_back(b);
  }
  ASSERT_EQ(ref["accuracy"].size(), filled.size());
  for (size_t b = 0; b < filled.size(); ++b) {
    EXPECT_NEAR(filled[b].accuracy, ref["accuracy"][b], 1e-12) << "bin " << b;
    EXPECT_NEAR(filled[b].confidence, ref["confidence"][b], 1e-12) << "bin " << b;
  }
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

TEST(ReliabilityTest, PitAndIntervalCoverageMatchHandValuesAndCoverage90) {
  // N(0, 1): u = Phi(y) for y = 0, 1, 2, -0.5.
  const GaussianMixture normal = OneInputMixture({0.0}, {1.0}, {1.0}, 4);
  const std::vector<double> y = {0.0, 1.0, 2.0, -0.5};
  const std::vector<double> pit = MixturePit(normal, y);
  const double expected[] = {0.5, 0.8413447460685429, 0.9772498680518208, 0.3085375387259869};
  for (size_t i = 0; i < 4; ++i) EXPECT_NEAR(pit[i], expected[i], 1e-12) << "input " << i;
  // Central 50% interval holds y = 0 and -0.5; the 90% interval all but y = 2.
  const std::vector<IntervalCoverage> c = IntervalCoverages(pit, {0.5, 0.9});
  EXPECT_DOUBLE_EQ(c[0].nominal, 0.5);
  EXPECT_DOUBLE_EQ(c[0].observed, 0.5);
  EXPECT_DOUBLE_EQ(c[1].observed, 0.75);
  EXPECT_DOUBLE_EQ(c[1].observed, ScoreRegression(normal, y).coverage_90);
  // 1/2 N(-1, 1) + 1/2 N(1, 1) at y = 1: Phi(2) / 2 + Phi(0) / 2.
  const GaussianMixture pair = OneInputMixture({-1.0, 1.0}, {1.0, 1.0}, {0.5, 0.5}, 1);
  EXPECT_NEAR(MixturePit(pair, {1.0})[0], 0.5 * 0.9772498680518208 + 0.25, 1e-12);
}

TEST(ReliabilityTest, HistogramCountsHitsAndMissesPerBin) {
  // Upper edge = the largest of 6 scores (the 99th percentile's rank is 6): edges 0, .25, .5,
  // .75, 1.
  const OutcomeHistogram h =
      HistogramByOutcome({0, 0.1, 0.25, 0.5, 0.9, 1.0}, {true, false, true, true, false, true}, 4);
  EXPECT_EQ(h.edges, (std::vector<double>{0, 0.25, 0.5, 0.75, 1.0}));
  EXPECT_EQ(h.hits, (std::vector<int64_t>{1, 1, 1, 1}));
  EXPECT_EQ(h.misses, (std::vector<int64_t>{1, 0, 0, 1}));
}

TEST(ReliabilityTest, HistogramPutsTheTopPercentIntoTheLastBin) {
  // 100 scores of 0.5 and one of 10: the 100th smallest of 101 is 0.5, so 10 overflows.
  std::vector<double> scores(100, 0.5);
  std::vector<bool> hit(100, true);
  scores.push_back(10.0);
  hit.push_back(false);
  const OutcomeHistogram h = HistogramByOutcome(scores, hit, 2);
  EXPECT_EQ(h.edges, (std::vector<double>{0, 0.25, 0.5}));
  EXPECT_EQ(h.hits, (std::vector<int64_t>{0, 100}));
  EXPECT_EQ(h.misses, (std::vector<int64_t>{0, 1}));
  // All scores 0: the range falls back to [0, 1].
  EXPECT_EQ(HistogramByOutcome({0, 0}, {true, false}, 2).edges, (std::vector<double>{0, 0.5, 1}));
}

TEST(ReliabilityTest, SelectiveRmseKeepsTheLeastUncertainInputs) {
  const std::vector<double> uncertainty = {0.1, 0.3, 0.2, 0.4}, errors = {1, -3, 2, 4};
  const std::vector<double> rmse = SelectiveRmse(uncertainty, errors, {0.5, 0.75, 1.0});
  EXPECT_NEAR(rmse[0], std::sqrt((1 + 4) / 2.0), 1e-15);      // inputs 0 and 2
  EXPECT_NEAR(rmse[1], std::sqrt((1 + 4 + 9) / 3.0), 1e-15);  // and input 1
  EXPECT_NEAR(rmse[2], std::sqrt(30 / 4.0), 1e-15);
  EXPECT_TRUE(std::isnan(SelectiveRmse({}, {}, {1.0})[0]));
}

}  // namespace reliability_test
}  // namespace chorus
