// End-to-end tests of warm starts (coordinator/warm_start.h): runs of the invented demo data that
// start from the bundles the promote tests share, on fewer training rows (so this run's
// standardisation differs from the bundle's), in process and through a worker.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <string>

#include <nlohmann/json.hpp>

#include "proto/bundle_codec.h"
#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace warm_start_test {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::ReadTextFile;

class WarmStartTest : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    // The promote tests' weaker runs, shared with them.
    classifier_ = testing::SharedPromoteRun(testing::PromoteRun::kWeaker);
    regressor_ = testing::SharedPromoteRun(testing::PromoteRun::kWeakerRegression);
  }
  void SetUp() override {
    ASSERT_FALSE(classifier_.empty() || regressor_.empty());
    dir_ = testing::MakeTempDir("chorus-warm");
    testing::WriteDemoData(dir_);
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // A run on the first 600 of the 1200 training rows of the same demo data, warm-started from
  // `start`, for one epoch at a learning rate too small to move the weights (float32 steps of
  // 1e-9 * gradient vanish against weights of order 0.1); `extra` adds train keys or sections.
  std::string Yaml(bool regression, const std::string& start, const std::string& model,
                   const std::string& cluster) const {
    const std::string data =
        regression ? "data: {train: data/faults_train.csv, test: data/faults_test.csv, "
                     "target: hours_to_fault, task: regression, categorical: [station],\n"
                     "       max_train_rows: 600}\n"
                   : "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, "
                     "target: cause, categorical: [station], max_train_rows: 600}\n";
    return "run: {name: warm, seed: 3}\n" + data + model +
           "train: {epochs: 1, optimizer: {lr: 1.0e-9, momentum: 0, weight_decay: 0},\n"
           "       warm_start: " + start + "}\n"
           "ensemble: {members: 1}\n" + cluster;
  }

  static json Report(const std::string& run) {
    return json::parse(ReadTextFile(run + "/report.json"));
  }

  static std::string classifier_, regressor_;
  std::string dir_;
};

std::string WarmStartTest::classifier_, WarmStartTest::regressor_;

constexpr char kClassifierModel[] = "model: {hidden: [16]}\n";
constexpr char kRegressorModel[] = "model: {hidden: [16], activation: tanh}\n";
constexpr char kInProcess[] = "cluster: {local_workers: 0}\n";

// With the weights held still, the member predicts what the starting member predicted: the
// first layer (and for regression the last) absorbed the change of standardisation exactly, up
// to float rounding. Its test scores (report.json members[0].test, before temperature) equal the
// starting run's own.
TEST_F(WarmStartTest, StartingWeightsCarryOverThroughANewStandardisation) {
  for (const bool regression : {false, true}) {
    SCOPED_TRACE(regression ? "regression" : "classification");
    const std::string start = regression ? regressor_ : classifier_;
    const std::string run = testing::RunDemo(
        dir_, regression ? "warm-regression" : "warm",
        Yaml(regression, start + "/bundle.chorus", regression ? kRegressorModel : kClassifierModel,
             kInProcess));
    ASSERT_FALSE(run.empty());
    const json warm = Report(run), own = Report(start);
    EXPECT_NE(warm["data_hash"], own["data_hash"]);  // 600 rows, not 1200: new statistics
    const json& got = warm["members"][0]["test"];
    const json& want = own["members"][0]["test"];
    EXPECT_NEAR(got["nll"].get<double>(), want["nll"].get<double>(), 1e-4) << got.dump();
    if (regression) {
      EXPECT_NEAR(got["rmse"].get<double>(), want["rmse"].get<double>(), 1e-3 * want["rmse"].get<double>());
    } else {
      EXPECT_EQ(got["accuracy"], want["accuracy"]);
    }
    // The report scores the starting bundle on this run's test split: the same rows its own run
    // was scored on, so its own report's ensemble scores (regression targets pass through this
    // run's target standardisation and back, which rounds them differently: 1e-8 relative).
    const json& w = warm["warm_start"];
    EXPECT_EQ(w["sha256"], ReadBundleFile(start + "/bundle.chorus").value().payload_sha256);
    const double own_nll = own["ensemble"]["test"]["nll"].get<double>();
    EXPECT_NEAR(w["start_bundle_test"]["nll"].get<double>(), own_nll, regression ? 1e-7 * std::abs(own_nll) : 0.0);
    EXPECT_NEAR(w["nll_change"].get<double>(),
                warm["ensemble"]["test"]["nll"].get<double>() - w["start_bundle_test"]["nll"].get<double>(),
                1e-12);
  }
}

// The same warm start through an embedded worker: the member's starting weights travel in its
// lease reply, and the run's results are those of the in-process run.
TEST_F(WarmStartTest, AWorkerReceivesTheStartingWeightsInItsLease) {
  const std::string in_process = testing::RunDemo(
      dir_, "warm-local", Yaml(false, classifier_ + "/bundle.chorus", kClassifierModel, kInProcess));
  const std::string worker = testing::RunDemo(
      dir_, "warm-worker",
      Yaml(false, classifier_ + "/bundle.chorus", kClassifierModel, "cluster: {local_workers: 1}\n"));
  ASSERT_FALSE(in_process.empty() || worker.empty());
  EXPECT_EQ(Report(worker)["manifest"]["coordinator"]["mode"], "workers");
  EXPECT_EQ(Report(worker)["members"][0]["test"], Report(in_process)["members"][0]["test"]);
  EXPECT_EQ(Report(worker)["ensemble"]["test"], Report(in_process)["ensemble"]["test"]);
}

// A registry without a current bundle yet (the first night) means a cold start for `epochs`; a
// warm start trains for `warm_epochs`.
TEST_F(WarmStartTest, AnEmptyRegistryStartsColdAndWarmEpochsApplyOnlyToWarmStarts) {
  const std::string registry = dir_ + "/registry";
  fs::create_directories(registry + "/versions");
  const std::string yaml =
      "run: {name: nightly, seed: 3}\n"
      "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
      "       categorical: [station]}\n" + std::string(kClassifierModel) +
      "train: {epochs: 3, warm_start: " + registry + ", warm_epochs: 1}\n"
      "ensemble: {members: 1}\n" + kInProcess;
  const std::string cold = testing::RunDemo(dir_, "cold-night", yaml);
  ASSERT_FALSE(cold.empty());
  EXPECT_FALSE(Report(cold).contains("warm_start"));
  EXPECT_EQ(Report(cold)["members"][0]["epochs_trained"], 3);
  auto r = testing::RunShell(testing::BinaryPath("chorus") + " promote " + cold + " --registry " +
                                 registry,
                             120);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const std::string warm = testing::RunDemo(dir_, "warm-night", yaml);
  ASSERT_FALSE(warm.empty());
  EXPECT_EQ(Report(warm)["warm_start"]["sha256"],
            ReadBundleFile(cold + "/bundle.chorus").value().payload_sha256);
  EXPECT_EQ(Report(warm)["members"][0]["epochs_trained"], 1);
}

// A registry directory means its current bundle; what does not fit is refused before training.
TEST_F(WarmStartTest, RegistryCurrentIsUsedAndMismatchesAreRefused) {
  const std::string registry = dir_ + "/registry";
  auto r = testing::RunShell(testing::BinaryPath("chorus") + " promote " + classifier_ +
                                 " --registry " + registry,
                             120);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const std::string run =
      testing::RunDemo(dir_, "warm-registry", Yaml(false, registry, kClassifierModel, kInProcess));
  ASSERT_FALSE(run.empty());
  EXPECT_EQ(Report(run)["warm_start"]["sha256"],
            ReadBundleFile(classifier_ + "/bundle.chorus").value().payload_sha256);
  // report.html shows the starting bundle's scores beside the run's.
  const std::string page = ReadTextFile(run + "/report.html");
  EXPECT_NE(page.find("warm-start bundle (run weaker)"), std::string::npos);
  EXPECT_NE(page.find("Warm-started from"), std::string::npos);

  const auto refused = [&](const std::string& name, const std::string& yaml) {
    testing::WriteTextFile(dir_ + "/" + name + ".yaml", yaml);
    const auto result = testing::RunShell(testing::BinaryPath("chorus") + " run " + dir_ + "/" +
                                              name + ".yaml --out " + dir_ + "/runs-" + name,
                                          120);
    EXPECT_EQ(result.exit_code, 2) << result.output;
    EXPECT_FALSE(fs::exists(dir_ + "/runs-" + name)) << "nothing written for " << name;
    return result.output;
  };
  EXPECT_NE(refused("shape", Yaml(false, registry, "model: {hidden: [8]}\n", kInProcess))
                .find("networks differ: the bundle's widths [11, 16, 5] (relu), this run's [11, 8, 5]"),
            std::string::npos);
  EXPECT_NE(refused("task", Yaml(true, registry, kRegressorModel, kInProcess))
                .find("the bundle is a classification model, this run regression"),
            std::string::npos);
  fs::create_directories(dir_ + "/not-a-registry");
  EXPECT_NE(refused("not-registry", Yaml(false, dir_ + "/not-a-registry", kClassifierModel, kInProcess))
                .find("train.warm_start: " + dir_ + "/not-a-registry: not a registry"),
            std::string::npos);
  EXPECT_NE(refused("search", Yaml(false, registry, kClassifierModel,
                                   kInProcess + std::string("search: {lr: [0.01, 0.1]}\n")))
                .find("train.warm_start: a warm start fine-tunes"),
            std::string::npos);
}

}  // namespace warm_start_test
}  // namespace chorus
