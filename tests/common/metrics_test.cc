#include "common/metrics.h"

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
namespace metrics_test {

using testing::MakeTempDir;
using testing::RandomLabels;
using testing::RandomProbabilities;
using testing::ParseReferenceOutput;
using testing::RunReferenceScript;
using testing::WriteMatrixText;

MatrixD Column(const std::vector<double>& values) {
  return Eigen::Map<const Eigen::VectorXd>(values.data(), values.size());
}

MatrixD Column(const std::vector<int32_t>& labels) {
  return Eigen::Map<const Eigen::VectorXi>(labels.data(), labels.size()).cast<double>();
}

GaussianMixture SingleGaussian(int inputs, double mean, double stddev) {
  return GaussianMixture{
      MatrixD::Constant(inputs, 1, mean), MatrixD::Constant(inputs, 1, stddev), {1.0}};
}

TEST(MetricsTest, ClassificationMatchesScikitLearn) {
  struct Case {
    int rows, classes;
    uint64_t seed;
  };
  for (const Case& c : {Case{200, 3, 11}, Case{500, 10, 12}}) {
    SCOPED_TRACE("classes " + std::to_string(c.classes) + ", seed " + std::to_string(c.seed));
    Philox rng(c.seed);
    const MatrixD probs = RandomProbabilities(c.rows, c.classes, &rng);
    const std::vector<int32_t> labels = RandomLabels(c.rows, c.classes, &rng);
    const std::string dir = MakeTempDir("chorus-metrics");
    WriteMatrixText(dir + "/probs.txt", probs);
    WriteMatrixText(dir + "/labels.txt", Column(labels));
    auto ref = ParseReferenceOutput(
        RunReferenceScript("sklearn_metrics.py", {dir + "/probs.txt", dir + "/labels.txt", "15"}));
    ASSERT_EQ(ref.size(), 4u);
    const ClassificationMetrics ours = ScoreClassification(probs, labels, 15);
    // scikit-learn accuracy_score(y, p.argmax(1)).
    EXPECT_NEAR(ours.accuracy, ref["accuracy"][0], 1e-12);
    // scikit-learn log_loss(y, p, labels=range(K)).
    EXPECT_NEAR(ours.nll, ref["nll"][0], 1e-9);
    // scikit-learn: sum_k brier_score_loss(y == k, p[:, k]). Summing the one-vs-rest Briers swaps
    // the order of mean_i and sum_k in our mean_i sum_k (p_ik - [y_i = k])^2, so they are equal.
    EXPECT_NEAR(ours.brier, ref["brier"][0], 1e-9);
    // scikit-learn calibration_curve(correct, confidence, strategy='uniform') weighted by bin size.
    EXPECT_NEAR(ours.ece, ref["ece"][0], 1e-9);
    if (!HasFailure()) std::filesystem::remove_all(dir);
  }
}

TEST(MetricsTest, EceMatchesHandWorkedExample) {
  // 6 inputs, 4 classes, 3 bins (0, 1/3], (1/3, 2/3], (2/3, 1]; confidence = top probability.
  MatrixD probs(6, 4);
  probs << 0.30, 0.25, 0.25, 0.20,  // label 0: c = 0.30, right, bin 0
      0.20, 0.20, 0.28, 0.32,       // label 1: c = 0.32, wrong, bin 0
      0.50, 0.30, 0.10, 0.10,       // label 0: c = 0.50, right, bin 1
      0.10, 0.60, 0.20, 0.10,       // label 2: c = 0.60, wrong, bin 1
      0.90, 0.05, 0.03, 0.02,       // label 0: c = 0.90, right, bin 2
      0.05, 0.80, 0.10, 0.05;       // label 1: c = 0.80, right, bin 2
  const std::vector<int32_t> labels = {0, 1, 0, 2, 0, 1};
  // Bin 0: acc 1/2, conf (0.30 + 0.32) / 2 = 0.31, gap 0.19.
  // Bin 1: acc 1/2, conf (0.50 + 0.60) / 2 = 0.55, gap 0.05.
  // Bin 2: acc 1,   conf (0.90 + 0.80) / 2 = 0.85, gap 0.15.
  // ECE = 2/6 * 0.19 + 2/6 * 0.05 + 2/6 * 0.15 = 0.39 / 3 = 0.13.
  EXPECT_NEAR(ExpectedCalibrationError(probs, labels, 3), 0.13, 1e-12);
  // Accuracy 4/6; Brier of row 1 by hand: 0.7^2 + 0.25^2 + 0.25^2 + 0.2^2 = 0.655.
  EXPECT_NEAR(ScoreClassification(probs, labels, 3).accuracy, 4.0 / 6.0, 1e-15);
  EXPECT_NEAR(ScoreClassification(probs.topRows(1), {0}, 3).brier, 0.655, 1e-12);
}

TEST(MetricsTest, EdgeConfidenceTiesAndZeroProbability) {
  // Row 0: a tie, so the arg-max is class 0 (right); c = 0.5 sits on the edge of 2 bins and
  // belongs to bin 0 = (0, 0.5]. Row 1: c = 1, wrong. By hand: bin 0 gap |1 - 0.5| = 0.5,
  // bin 1 gap |0 - 1| = 1, ECE = 0.5 * 0.5 + 0.5 * 1 = 0.75 (0.25 if c = 0.5 went to bin 1).
  MatrixD probs(2, 2);
  probs << 0.5, 0.5, 1.0, 0.0;
  const ClassificationMetrics m = ScoreClassification(probs, {0, 1}, 2);
  EXPECT_NEAR(m.ece, 0.75, 1e-15);
  EXPECT_NEAR(m.accuracy, 0.5, 1e-15);
  // NLL: row 1 has p[label] = 0, floored at 1e-300: (ln 2 - ln 1e-300) / 2.
  EXPECT_NEAR(m.nll, (std::log(2.0) + 300 * std::log(10.0)) / 2, 1e-9);
}

TEST(MetricsTest, RegressionMatchesScipyMixture) {
  const int n = 120;
  const std::vector<double> weights = {0.2, 0.5, 0.3};
  Philox rng(21);
  SCOPED_TRACE("seed 21");
  GaussianMixture mix{MatrixD(n, 3), MatrixD(n, 3), weights};
  std::vector<double> targets(n);
  for (int i = 0; i < n; ++i) {
    for (int m = 0; m < 3; ++m) {
      mix.mean(i, m) = rng.NextNormal();
      mix.stddev(i, m) = 0.3 + rng.NextUniform();
    }
    targets[i] = 1.5 * rng.NextNormal();
  }
  const std::string dir = MakeTempDir("chorus-regression");
  WriteMatrixText(dir + "/mean.txt", mix.mean);
  WriteMatrixText(dir + "/stddev.txt", mix.stddev);
  WriteMatrixText(dir + "/weights.txt", Column(weights).transpose());
  WriteMatrixText(dir + "/targets.txt", Column(targets));
  auto ref = ParseReferenceOutput(RunReferenceScript(
      "scipy_regression.py",
      {dir + "/mean.txt", dir + "/stddev.txt", dir + "/weights.txt", dir + "/targets.txt"}));
  ASSERT_EQ(ref["quantile_95"].size(), static_cast<size_t>(n));
  const RegressionMetrics ours = ScoreRegression(mix, targets);
  // SciPy: -mean ln sum_m w_m scipy.stats.norm.pdf(y, mu_m, sigma_m).
  EXPECT_NEAR(ours.nll, ref["nll"][0], 1e-9);
  // NumPy: sqrt(mean (y - sum_m w_m mu_m)^2).
  EXPECT_NEAR(ours.rmse, ref["rmse"][0], 1e-12);
  // SciPy brentq on sum_m w_m norm.cdf gives the 5% and 95% quantiles, hence coverage.
  EXPECT_DOUBLE_EQ(ours.coverage_90, ref["coverage_90"][0]);
  for (int i = 0; i < n; ++i) {
    EXPECT_NEAR(MixtureQuantile(mix, i, 0.05), ref["quantile_05"][i], 1e-8) << "input " << i;
    EXPECT_NEAR(MixtureQuantile(mix, i, 0.95), ref["quantile_95"][i], 1e-8) << "input " << i;
  }
  if (!HasFailure()) std::filesystem::remove_all(dir);
}

TEST(MetricsTest, MixtureQuantileMatchesNormalTable) {
  // Standard normal table: z_0.95 = 1.6448536269514722, so q_0.95 of N(3, 2^2) = 3 + 2 z_0.95.
  const GaussianMixture g = SingleGaussian(1, 3.0, 2.0);
  EXPECT_NEAR(MixtureQuantile(g, 0, 0.95), 3.0 + 2.0 * 1.6448536269514722, 1e-8);
  EXPECT_NEAR(MixtureQuantile(g, 0, 0.05), 3.0 - 2.0 * 1.6448536269514722, 1e-8);
  EXPECT_NEAR(MixtureQuantile(g, 0, 0.5), 3.0, 1e-8);
  // By symmetry the median of 0.5 N(-1, 1) + 0.5 N(1, 1) is 0.
  const GaussianMixture two{MatrixD{{-1.0, 1.0}}, MatrixD{{1.0, 1.0}}, {0.5, 0.5}};
  EXPECT_NEAR(MixtureQuantile(two, 0, 0.5), 0.0, 1e-8);
}

TEST(MetricsTest, RegressionHandCase) {
  // N(0, 1) everywhere; the central 90% interval is [-1.6449, 1.6449] (normal table).
  const std::vector<double> targets = {0, 1, -1.6, 1.7, -2, 3, 0.5, 1.64, -1.65, 10};
  const RegressionMetrics m = ScoreRegression(SingleGaussian(10, 0.0, 1.0), targets);
  EXPECT_DOUBLE_EQ(m.coverage_90, 0.5);  // inside: 0, 1, -1.6, 0.5, 1.64
  // sum y^2 = 0 + 1 + 2.56 + 2.89 + 4 + 9 + 0.25 + 2.6896 + 2.7225 + 100 = 125.1121.
  EXPECT_NEAR(m.rmse, std::sqrt(12.51121), 1e-12);
  // -ln N(y; 0, 1) = ln sqrt(2 pi) + y^2 / 2, with ln sqrt(2 pi) = 0.9189385332046727.
  EXPECT_NEAR(m.nll, 0.9189385332046727 + 12.51121 / 2, 1e-12);
}

}  // namespace metrics_test
}  // namespace chorus
