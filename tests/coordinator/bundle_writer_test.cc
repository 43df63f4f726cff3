// A run's bundle, saved and loaded, reproduces the run: every sample's test outputs (re-drawn
// from the basin fits with the stored seeds) bit for bit, and the ensemble's test scores exactly.
// Members are trained in process on the invented demo data (tools/demo_data.cc).
#include "coordinator/bundle_writer.h"

#include <gtest/gtest.h>

#include <filesystem>

#include "common/dataset.h"
#include "common/evaluation.h"
#include "common/predictor.h"
#include "common/rng.h"
#include "proto/bundle_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace bundle_writer_test {

struct Scenario {
  const char* name;
  Task task;
  BasinMethod basin;
  Weighting weighting;
  LaplaceHessian hessian = LaplaceHessian::kAuto;
};

class BundleWriterTest : public ::testing::TestWithParam<Scenario> {
 protected:
  static void SetUpTestSuite() {
    dir_ = new std::string(testing::MakeTempDir("chorus-bundle-writer"));
    // 1500 test rows: predictions cross the 1024-row batch boundary.
    const auto r = testing::RunShell(testing::BinaryPath("chorus-demo-data") + " " + *dir_ +
                                     " --train-rows 900 --test-rows 1500");
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }
  static void TearDownTestSuite() {
    std::filesystem::remove_all(*dir_);
    delete dir_;
  }

  static Config MakeConfig(const Scenario& s) {
    Config c;
    c.run.seed = 17;
    const bool classify = s.task == Task::kClassification;
    c.data.train = *dir_ + (classify ? "/alarms_train.csv" : "/faults_train.csv");
    c.data.test = *dir_ + (classify ? "/alarms_test.csv" : "/faults_test.csv");
    c.data.target = classify ? "cause" : "hours_to_fault";
    c.data.task = s.task;
    c.data.categorical = {"station"};
    c.data.folds = 0;  // a holdout: EvaluateEnsemble scores the members' own validation outputs
    c.model.hidden = {12, 8};
    c.model.activation = Activation::kTanh;
    c.train.epochs = 2;
    c.train.batch_size = 64;
    c.ensemble.members = 3;
    c.ensemble.weighting = s.weighting;
    c.ensemble.basin.method = s.basin;
    c.ensemble.basin.epochs = 1;
    c.ensemble.basin.lr = 0.01;
    c.ensemble.basin.snapshots = 4;
    c.ensemble.basin.rank = 3;
    c.ensemble.basin.samples = 3;
    c.ensemble.basin.scale = 1.5;
    c.ensemble.basin.hessian = s.hessian;
    // Cyclical SG-MCMC: 2 epochs of 13 steps in 2 cycles, sampling in each cycle's second half.
    c.ensemble.basin.sgmcmc = {SgmcmcSampler::kSghmc, 2, 0.5, 2, 1.0, 0.1};
    return c;
  }

  static std::string* dir_;
};

std::string* BundleWriterTest::dir_ = nullptr;

TEST_P(BundleWriterTest, SavedBundleReproducesTheRunsTestOutputsAndScores) {
  const Config config = MakeConfig(GetParam());
  StatusOr<PreparedData> data = LoadPreparedData(config.data, config.run.seed);
  ASSERT_TRUE(data.ok()) << data.status().ToString();
  std::vector<MemberResult> members;
  for (int i = 0; i < config.ensemble.members; ++i) {
    const MemberSpec spec{i, Derive(config.run.seed, static_cast<uint64_t>(i)), config.model,
                          config.train, config.ensemble.basin};
    StatusOr<MemberResult> r = TrainMember(spec, data.value(), nullptr);
    ASSERT_TRUE(r.ok()) << r.status().ToString();
    members.push_back(std::move(r).value());
  }
  const EnsembleEvaluation ev = EvaluateEnsemble(data.value(), members, config.ensemble,
                                                 config.report, config.run.seed, nullptr);
  const TrainingSummary summary = SummarizeTraining(data.value(), nullptr);
  const std::string bytes = EncodeBundleFile(
      MakeRunBundle(config, data.value(), members, ev, std::string(64, 'c'), summary));
  StatusOr<BundleFile> loaded = DecodeBundleFile(bytes, "bundle.chorus");
  ASSERT_TRUE(loaded.ok()) << loaded.status().ToString();
  // The training data's summary comes back as written.
  const TrainingSummary& read = loaded.value().bundle.training_summary;
  EXPECT_EQ(read.rows, data.value().train.rows());
  ASSERT_EQ(read.columns.size(), summary.columns.size());
  for (size_t k = 0; k < read.columns.size(); ++k) {
    EXPECT_EQ(read.columns[k].numeric.values, summary.columns[k].numeric.values) << k;
    EXPECT_EQ(read.columns[k].numeric.upto, summary.columns[k].numeric.upto) << k;
    EXPECT_EQ(read.columns[k].category_shares, summary.columns[k].category_shares) << k;
  }
  EXPECT_EQ(read.class_shares, summary.class_shares);
  EXPECT_EQ(read.target.values, summary.target.values);
  const Predictor predictor = Predictor::Create(loaded.value().bundle).value();

  int64_t c = 0;
  for (const MemberResult& m : members) {
    for (const Matrix* outputs : m.TestSamples()) {
      EXPECT_EQ(predictor.ComponentOutputs(c++, data.value().test.x), *outputs)
          << "component " << c;
    }
  }
  ASSERT_EQ(c, predictor.Components());
  const Prediction p = predictor.Predict(data.value().test.x);
  const Split& test = data.value().test;
  if (config.data.task == Task::kClassification) {
    const ClassificationMetrics got =
        ScoreClassification(p.classification.probabilities, test.labels, config.report.ece_bins);
    EXPECT_EQ(got.accuracy, ev.test.classification.accuracy);
    EXPECT_EQ(got.nll, ev.test.classification.nll);
    EXPECT_EQ(got.brier, ev.test.classification.brier);
    EXPECT_EQ(got.ece, ev.test.classification.ece);
  } else {
    std::vector<double> y;
    for (float t : test.targets) {
      y.push_back(static_cast<double>(t) * data.value().target_scale + data.value().target_mean);
    }
    const RegressionMetrics got = ScoreRegression(p.regression.mixture, y);
    EXPECT_EQ(got.rmse, ev.test.regression.rmse);
    EXPECT_EQ(got.nll, ev.test.regression.nll);
    EXPECT_EQ(got.coverage_90, ev.test.regression.coverage_90);
  }
}

INSTANTIATE_TEST_SUITE_P(
    Runs, BundleWriterTest,
    ::testing::Values(Scenario{"ClassificationLowRank", Task::kClassification,
                               BasinMethod::kGaussianLowRank, Weighting::kStacking},
                      Scenario{"ClassificationPoints", Task::kClassification, BasinMethod::kNone,
                               Weighting::kGreedy},
                      Scenario{"RegressionDiag", Task::kRegression, BasinMethod::kGaussianDiag,
                               Weighting::kUniform},
                      Scenario{"ClassificationLaplace", Task::kClassification,
                               BasinMethod::kLaplaceLastLayer, Weighting::kUniform},
                      Scenario{"RegressionLaplaceKronecker", Task::kRegression,
                               BasinMethod::kLaplaceLastLayer, Weighting::kStacking,
                               LaplaceHessian::kKronecker},
                      Scenario{"ClassificationCyclicalSgmcmc", Task::kClassification,
                               BasinMethod::kCyclicalSgmcmc, Weighting::kUniform}),
    [](const ::testing::TestParamInfo<Scenario>& info) { return info.param.name; });

}  // namespace bundle_writer_test
}  // namespace chorus
