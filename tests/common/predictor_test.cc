// The predictor's per-row outputs: a proper distribution, the uncertainty split's identities,
// quantiles that bracket the mean, and rows that do not depend on their neighbours' batch.
#include "common/predictor.h"

#include <gtest/gtest.h>

#include <cmath>

#include "execution/tbb_parallel_for.h"
#include "tests/testing/synthetic_bundle.h"

namespace chorus {
namespace predictor_test {

using testing::RandomInputs;
using testing::SyntheticBundle;
using testing::SyntheticBundleSpec;

TEST(PredictorTest, ComponentsAreEveryMembersSamples) {
  const Bundle b = SyntheticBundle({});  // a point, a diag fit and a low-rank fit, 3 samples each
  const Predictor p = Predictor::Create(b).value();
  EXPECT_EQ(p.Components(), 1 + 3 + 3);
  EXPECT_EQ(p.Features(), b.widths[0]);
  EXPECT_EQ(p.task(), Task::kClassification);
}

TEST(PredictorTest, ClassificationRowsAreDistributionsWithAConsistentSplit) {
  SyntheticBundleSpec spec;
  spec.classes = 4;
  const Bundle b = SyntheticBundle(spec);
  const ClassPrediction c =
      Predictor::Create(b).value().Predict(RandomInputs(300, b.widths[0], 5)).classification;
  ASSERT_EQ(c.probabilities.rows(), 300);
  for (Eigen::Index i = 0; i < c.probabilities.rows(); ++i) {
    EXPECT_NEAR(c.probabilities.row(i).sum(), 1.0, 1e-12);
    Eigen::Index arg;
    EXPECT_EQ(c.confidence[i], c.probabilities.row(i).maxCoeff(&arg));
    EXPECT_EQ(c.predicted[i], arg);
    // 0 <= I <= H[p] <= ln K (Depeweg et al., ICML 2018: H[p] = E[H[p_c]] + I, both >= 0).
    EXPECT_GE(c.epistemic[i], 0.0);
    EXPECT_LE(c.epistemic[i], c.total_entropy[i] + 1e-12);
    EXPECT_LE(c.total_entropy[i], std::log(4.0) + 1e-12);
  }
}

TEST(PredictorTest, RegressionQuantilesBracketTheMeanAndStdsAreOrdered) {
  SyntheticBundleSpec spec;
  spec.task = Task::kRegression;
  const Bundle b = SyntheticBundle(spec);
  const RegressionPrediction r =
      Predictor::Create(b).value().Predict(RandomInputs(200, b.widths[0], 6)).regression;
  ASSERT_EQ(r.mean.size(), 200u);
  for (size_t i = 0; i < r.mean.size(); ++i) {
    EXPECT_LT(r.lower_5[i], r.mean[i]);
    EXPECT_GT(r.upper_95[i], r.mean[i]);
    EXPECT_GE(r.total_std[i], r.epistemic_std[i]);
    EXPECT_GT(r.epistemic_std[i], 0.0);  // samples of different members disagree
  }
}

// Each sample is a pure function of its basin fit and seed (common/predictor.h), so drawing the
// samples on many threads gives the same predictive, bit for bit, as drawing them in order.
TEST(PredictorTest, SamplesDrawnInParallelEqualSamplesDrawnInOrder) {
  const Bundle b = SyntheticBundle({});
  const TbbParallelFor parallel;
  const Predictor in_order = Predictor::Create(b).value();
  const Predictor in_parallel = Predictor::Create(b, &parallel).value();
  const Matrix x = RandomInputs(64, b.widths[0], 8);
  for (int64_t c = 0; c < in_order.Components(); ++c) {
    EXPECT_EQ(in_order.ComponentOutputs(c, x), in_parallel.ComponentOutputs(c, x)) << "component " << c;
  }
}

// Rows are independent: predicting a prefix gives that prefix's rows of the whole. Inputs fed in
// Predictor::kBatchRows batches from row 0 are bit-identical; here the prefix is one batch.
TEST(PredictorTest, ARowsPredictionDoesNotDependOnLaterRows) {
  const Bundle b = SyntheticBundle({});
  const Predictor p = Predictor::Create(b).value();
  const Matrix x = RandomInputs(Predictor::kBatchRows + 50, b.widths[0], 7);
  const MatrixD all = p.Predict(x).classification.probabilities;
  const MatrixD first = p.Predict(x.topRows(Predictor::kBatchRows)).classification.probabilities;
  EXPECT_EQ(first, all.topRows(Predictor::kBatchRows));
}

}  // namespace predictor_test
}  // namespace chorus
