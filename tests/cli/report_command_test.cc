// End-to-end tests of `chorus report` and `chorus compare` on small real runs of the demo data.
#include <gtest/gtest.h>

#include <cmath>
#include <filesystem>
#include <map>
#include <string>

#include <nlohmann/json.hpp>

#include "report/report_html.h"
#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace report_command_test {

namespace fs = std::filesystem;
using nlohmann::json;

class ReportCommandTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-report");
    testing::WriteDemoData(dir_);
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  std::string Run(const std::string& name, int seed) {
    return testing::RunDemo(
        dir_, name,
        testing::DemoClassificationYaml(
            name, seed, "train: {epochs: 3, batch_size: 50}\nensemble: {members: 3}\n"));
  }

  static testing::CommandResult Chorus(const std::string& args) {
    return testing::RunShell(testing::BinaryPath("chorus") + " " + args, 120);
  }

  std::string dir_;
};

TEST_F(ReportCommandTest, RewritesReportHtmlFromReportJsonAlone) {
  const std::string run = Run("rewrite", 3);
  ASSERT_FALSE(run.empty());
  fs::remove(run + "/report.html");
  fs::remove_all(run + "/jobs");  // nothing is recomputed from the members' results
  const auto r = Chorus("report " + run);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const std::string html = testing::ReadTextFile(run + "/report.html");
  const json report = json::parse(testing::ReadTextFile(run + "/report.json"));
  EXPECT_EQ(html, ReportHtml(report));
  EXPECT_TRUE(report.contains("manifest"));  // the run's manifest, stored for the page
  ASSERT_EQ(Chorus("report " + run).exit_code, 0);
  EXPECT_EQ(testing::ReadTextFile(run + "/report.html"), html);  // byte-stable
}

// The chart data in report.json agrees with the metrics computed separately (common/metrics.h):
// ECE from the reliability bins, accuracy or RMSE at full coverage, 90% coverage from the PIT.
TEST_F(ReportCommandTest, ChartDataInReportJsonAgreesWithTheMetrics) {
  const std::string c = Run("agree", 3);
  ASSERT_FALSE(c.empty());
  const json rc = json::parse(testing::ReadTextFile(c + "/report.json"));
  for (const char* set : {"calibrated", "uncalibrated"}) {
    double ece = 0, n = 0;
    for (const json& b : rc["reliability"][set]) n += b["count"].get<double>();
    for (const json& b : rc["reliability"][set]) {
      ece += b["count"].get<double>() / n *
             std::abs(b["accuracy"].get<double>() - b["confidence"].get<double>());
    }
    const char* metrics = std::string(set) == "calibrated" ? "test" : "test_uncalibrated";
    EXPECT_NEAR(ece, rc["ensemble"][metrics]["ece"].get<double>(), 1e-12) << set;
    EXPECT_EQ(n, rc["data"]["test_rows"].get<double>());
  }
  EXPECT_NEAR(rc["uncertainty"]["selective_accuracy"].back()["accuracy"].get<double>(),
              rc["ensemble"]["test"]["accuracy"].get<double>(), 1e-12);
  const std::string r = testing::RunDemo(
      dir_, "agree-regression",
      testing::DemoRegressionYaml("agree-regression", 5,
                                  "train: {epochs: 4, batch_size: 50, optimizer: {lr: 0.01}}\n"
                                  "ensemble: {members: 2}\n"));
  ASSERT_FALSE(r.empty());
  const json rr = json::parse(testing::ReadTextFile(r + "/report.json"));
  const json& levels = rr["interval_coverage"]["calibrated"];
  ASSERT_EQ(levels.size(), 19u);
  EXPECT_NEAR(levels[17]["nominal"].get<double>(), 0.9, 1e-12);
  // One target exactly on an interval end could fall either way between the two methods.
  EXPECT_NEAR(levels[17]["observed"].get<double>(),
              rr["ensemble"]["test"]["coverage_90"].get<double>(), 1.0 / 400 + 1e-12);
  EXPECT_NEAR(rr["uncertainty"]["selective_rmse"].back()["rmse"].get<double>(),
              rr["ensemble"]["test"]["rmse"].get<double>(), 1e-9);
  double inside = 0;
  for (const json& count : rr["uncertainty"]["epistemic_histogram"]["groups"][0]["counts"]) {
    inside += count.get<double>();
  }
  EXPECT_NEAR(inside / 400, levels[17]["observed"].get<double>(), 1e-12);
}

TEST_F(ReportCommandTest, ReportExitsTwoOnAMissingOrMalformedReport) {
  auto r = Chorus("report " + dir_ + "/no-such-run");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("no-such-run/report.json"), std::string::npos) << r.output;
  fs::create_directories(dir_ + "/broken");
  testing::WriteTextFile(dir_ + "/broken/report.json", "{\"name\": \"x\"}");
  r = Chorus("report " + dir_ + "/broken");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("field task"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(dir_ + "/broken/report.html"));
}

TEST_F(ReportCommandTest, CompareShowsDeltasAsATableAndAsJson) {
  const std::string a = Run("first", 3), b = Run("second", 4);
  ASSERT_FALSE(a.empty());
  ASSERT_FALSE(b.empty());
  auto r = Chorus("compare " + a + " " + b);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  for (const char* row : {"ensemble test NLL (tuned T)", "ensemble test ECE (T = 1)", "temperature",
                          "members finished", "effective members", "data hash", "config hash"}) {
    EXPECT_NE(r.output.find(row), std::string::npos) << row << "\n" << r.output;
  }
  r = Chorus("compare --json " + a + " " + b);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const json j = json::parse(r.output);
  // Different seeds give different configs and, through the validation split, different data.
  EXPECT_FALSE(j["same_config"].get<bool>());
  const json ra = json::parse(testing::ReadTextFile(a + "/report.json"));
  const json rb = json::parse(testing::ReadTextFile(b + "/report.json"));
  EXPECT_EQ(j["same_data"].get<bool>(), ra["data_hash"] == rb["data_hash"]);
  ASSERT_EQ(j["values"][1]["key"], "ensemble.test.nll");
  EXPECT_NEAR(
      j["values"][1]["delta"].get<double>(),
      rb["ensemble"]["test"]["nll"].get<double>() - ra["ensemble"]["test"]["nll"].get<double>(),
      1e-12);
}

// A plain ensemble against one with last-layer Laplace fits, on the same data and seed: the
// comparison names both methods and sets their samples and costs side by side.
TEST_F(ReportCommandTest, CompareWorksAcrossPosteriorMethods) {
  const std::string plain = Run("plain", 3);
  const std::string laplace = testing::RunDemo(
      dir_, "laplace",
      testing::DemoClassificationYaml("laplace", 3,
                                      "train: {epochs: 3, batch_size: 50}\nensemble: {members: 3,\n"
                                      "  basin: {method: laplace_last_layer, samples: 4}}\n"));
  ASSERT_FALSE(plain.empty());
  ASSERT_FALSE(laplace.empty());
  const auto r = Chorus("compare --json " + plain + " " + laplace);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const json j = json::parse(r.output);
  EXPECT_TRUE(j["same_data"].get<bool>());
  std::map<std::string, json> values, texts;
  for (const json& v : j["values"]) values[v["key"]] = v;
  for (const json& t : j["texts"]) texts[t["key"]] = t;
  EXPECT_EQ(texts["basin_method"]["a"], "none");
  EXPECT_EQ(texts["basin_method"]["b"], "laplace_last_layer");
  EXPECT_EQ(values["samples_per_member"]["a"], 1);
  EXPECT_EQ(values["samples_per_member"]["b"], 4);
  EXPECT_GT(values["compute.cpu_seconds_all_jobs"]["a"].get<double>(), 0);
  EXPECT_GT(values["compute.cpu_seconds_all_jobs"]["b"].get<double>(), 0);
  // The Laplace run also scores its members' probit predictives (T = 1), the plain run cannot.
  const json rb = json::parse(testing::ReadTextFile(laplace + "/report.json"));
  const json ra = json::parse(testing::ReadTextFile(plain + "/report.json"));
  ASSERT_TRUE(rb["ensemble"].contains("test_probit"));
  EXPECT_FALSE(ra["ensemble"].contains("test_probit"));
  EXPECT_GT(rb["ensemble"]["test_probit"]["nll"].get<double>(), 0);
  EXPECT_LE(rb["ensemble"]["test_probit"]["accuracy"].get<double>(), 1);
}

TEST_F(ReportCommandTest, CompareExitsTwoOnAnUnreadableRun) {
  const std::string a = Run("only", 3);
  ASSERT_FALSE(a.empty());
  const auto r = Chorus("compare " + a + " " + dir_ + "/missing");
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("missing/report.json"), std::string::npos) << r.output;
}

}  // namespace report_command_test
}  // namespace chorus
