// End-to-end tests of `chorus reference`: an HMC reference for a small demo run, and how the
// run's predictives compare with it (coordinator/reference_command.h).
#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include <nlohmann/json.hpp>

#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace reference_command_test {

namespace fs = std::filesystem;
using nlohmann::json;

class ReferenceCommandTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-reference");
    testing::WriteDemoData(dir_);
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }
  static testing::CommandResult Chorus(const std::string& args) {
    return testing::RunShell(testing::BinaryPath("chorus") + " " + args, 300);
  }
  std::string dir_;
};

// A short chain keeps the test quick; it checks the plumbing and the predictives, not the
// quality of the posterior (common/hmc_reference_test.cc checks that against quadrature).
constexpr const char* kShortChains = " --chains 2 --warmup 60 --draws 40 --thinning 1 --trajectory 0.2 --seed 1";

TEST_F(ReferenceCommandTest, ComparesTheRunsPredictivesWithTheHmcReference) {
  const std::string run = testing::RunDemo(
      dir_, "ref", testing::DemoClassificationYaml("ref", 5, "train: {epochs: 3, batch_size: 50}\nensemble: {members: 2}\n"));
  ASSERT_FALSE(run.empty());
  const auto r = Chorus("reference " + run + kShortChains);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("max R-hat"), std::string::npos) << r.output;
  const json ref = json::parse(testing::ReadTextFile(run + "/hmc_reference.json"));
  const json report = json::parse(testing::ReadTextFile(run + "/report.json"));
  EXPECT_EQ(ref["hmc"]["kept_draws"], 80);
  EXPECT_EQ(ref["test_rows"], 400);
  const json& p = ref["predictives"];
  ASSERT_EQ(p.size(), 4u);
  EXPECT_EQ(p[0]["top1_agreement"], 1.0);  // the reference against itself
  EXPECT_EQ(p[0]["mean_total_variation"], 0.0);
  for (const json& c : p) {
    EXPECT_GE(c["top1_agreement"].get<double>(), 0.0) << c.dump();
    EXPECT_LE(c["top1_agreement"].get<double>(), 1.0) << c.dump();
    EXPECT_GE(c["mean_total_variation"].get<double>(), 0.0) << c.dump();
    EXPECT_LE(c["mean_total_variation"].get<double>(), 1.0) << c.dump();
  }
  // The ensemble as its bundle predicts is the run's own test predictive (the report's tuned
  // numbers), and with uniform weights and no basin fit the members' trained points at T = 1 are
  // the report's uncalibrated ensemble: the comparison scores the very predictives the run did.
  EXPECT_NEAR(p[1]["test"]["nll"].get<double>(), report["ensemble"]["test"]["nll"].get<double>(), 1e-9);
  EXPECT_NEAR(p[2]["test"]["nll"].get<double>(), report["ensemble"]["test_uncalibrated"]["nll"].get<double>(), 1e-6);
  EXPECT_NEAR(p[2]["test"]["accuracy"].get<double>(), report["ensemble"]["test_uncalibrated"]["accuracy"].get<double>(), 1e-12);
  // The report carries the comparison from now on, and the page shows it.
  EXPECT_EQ(report["hmc_reference"], ref);
  const std::string html = testing::ReadTextFile(run + "/report.html");
  EXPECT_NE(html.find("<h2>HMC reference</h2>"), std::string::npos);
  EXPECT_NE(html.find("member 0&#39;s point alone, T = 1"), std::string::npos);
}

// With a Gaussian basin fit a bundle member keeps no trained weights, only the fit: its point,
// where a chain starts, is the fit's mean.
TEST_F(ReferenceCommandTest, MembersWithBasinFitsStartChainsAtTheirFitsMean) {
  const std::string run = testing::RunDemo(
      dir_, "diag", testing::DemoClassificationYaml("diag", 5, "train: {epochs: 3, batch_size: 50}\nensemble: {members: 2,\n"
                                                    "  basin: {method: gaussian_diag, epochs: 1, snapshots: 4, samples: 3}}\n"));
  ASSERT_FALSE(run.empty());
  const auto r = Chorus("reference " + run + kShortChains);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const json ref = json::parse(testing::ReadTextFile(run + "/hmc_reference.json"));
  EXPECT_EQ(ref["basin_method"], "gaussian_diag");
  ASSERT_EQ(ref["predictives"].size(), 4u);
  const json report = json::parse(testing::ReadTextFile(run + "/report.json"));
  EXPECT_NEAR(ref["predictives"][1]["test"]["nll"].get<double>(), report["ensemble"]["test"]["nll"].get<double>(), 1e-9);
}

TEST_F(ReferenceCommandTest, RefusesRegressionLargeNetworksAndMissingRuns) {
  const std::string regression = testing::RunDemo(
      dir_, "reg", testing::DemoRegressionYaml("reg", 5, "train: {epochs: 2, batch_size: 50}\nensemble: {members: 2}\n"));
  ASSERT_FALSE(regression.empty());
  auto r = Chorus("reference " + regression + kShortChains);
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("regression"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(regression + "/hmc_reference.json"));
  const std::string run = testing::RunDemo(
      dir_, "big", testing::DemoClassificationYaml("big", 5, "train: {epochs: 1, batch_size: 50}\nensemble: {members: 2}\n"));
  ASSERT_FALSE(run.empty());
  r = Chorus("reference " + run + " --max-parameters 10");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("more than --max-parameters 10"), std::string::npos) << r.output;
  r = Chorus("reference " + dir_ + "/no-such-run");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  r = Chorus("reference --help");
  EXPECT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(r.output.find("--prior-variance"), std::string::npos) << r.output;
}

}  // namespace reference_command_test
}  // namespace chorus
