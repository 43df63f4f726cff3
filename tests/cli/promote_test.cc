// End-to-end tests of `chorus promote` (coordinator/promote_command.h): real runs of the invented
// demo data, a better and a weaker one per task, promoted into fresh registries.
#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <gtest/gtest.h>

#include <algorithm>
#include <csignal>
#include <filesystem>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "proto/bundle_codec.h"
#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace promote_test {

namespace fs = std::filesystem;
using nlohmann::json;
using testing::ReadTextFile;


class PromoteTest : public ::testing::Test {
 protected:
  // Four small runs, shared by every test (promote only reads them) and every test process.
  static void SetUpTestSuite() {
    better_ = testing::SharedPromoteRun(testing::PromoteRun::kBetter);
    weaker_ = testing::SharedPromoteRun(testing::PromoteRun::kWeaker);
    better_regression_ = testing::SharedPromoteRun(testing::PromoteRun::kBetterRegression);
    weaker_regression_ = testing::SharedPromoteRun(testing::PromoteRun::kWeakerRegression);
  }

  void SetUp() override {
    ASSERT_FALSE(better_.empty() || weaker_.empty());
    registry_ = testing::MakeTempDir("chorus-registry") + "/registry";
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(fs::path(registry_).parent_path());
  }

  testing::CommandResult Promote(const std::string& run, const std::string& flags = "",
                                 const std::string& env = "") {
    return testing::RunShell(env + " " + testing::BinaryPath("chorus") + " promote " + run +
                                 " --registry " + registry_ + " " + flags,
                             120);
  }

  std::string CurrentTarget() const {
    std::error_code ec;
    return fs::read_symlink(registry_ + "/current", ec).string();
  }
  json CurrentDecision() const {
    return json::parse(ReadTextFile(registry_ + "/current/decision.json"));
  }
  std::vector<std::string> Entries(const std::string& sub) const {
    std::vector<std::string> names;
    for (const auto& e : fs::directory_iterator(registry_ + "/" + sub)) {
      names.push_back(e.path().filename().string());
    }
    std::sort(names.begin(), names.end());
    return names;
  }

  static std::string Sha256Of(const std::string& bundle) {
    const StatusOr<BundleFile> file = ReadBundleFile(bundle);
    EXPECT_TRUE(file.ok()) << file.status().ToString();
    return file.ok() ? file.value().payload_sha256 : "";
  }

  // The demo data the shared runs were trained on (SharedDemoRun's DIR/data).
  static std::string DemoDataOf(const std::string& run) {
    return fs::path(run).parent_path().parent_path().string() + "/data";
  }

  static std::string better_, weaker_, better_regression_, weaker_regression_;
  std::string registry_;
};

std::string PromoteTest::better_, PromoteTest::weaker_,
    PromoteTest::better_regression_, PromoteTest::weaker_regression_;

TEST_F(PromoteTest, FirstBundleThenABetterOneArePromoted) {
  auto r = Promote(weaker_);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const std::string first = CurrentTarget();
  EXPECT_EQ(CurrentDecision()["reasons"], json({"no current bundle"}));
  EXPECT_EQ(CurrentDecision()["shift"], json({{"skipped", "no current bundle"}}));
  EXPECT_EQ(ReadTextFile(registry_ + "/current/bundle.chorus"),
            ReadTextFile(weaker_ + "/bundle.chorus"));

  r = Promote(better_);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_NE(CurrentTarget(), first);
  EXPECT_EQ(ReadTextFile(registry_ + "/current/bundle.chorus"),
            ReadTextFile(better_ + "/bundle.chorus"));
  const json d = CurrentDecision();
  EXPECT_EQ(d["verdict"], "promote");
  EXPECT_EQ("versions/" + d["current"]["version"].get<std::string>(), first);
  EXPECT_EQ(d["current"]["sha256"], Sha256Of(weaker_ + "/bundle.chorus"));
  EXPECT_EQ(d["candidate"]["sha256"], Sha256Of(better_ + "/bundle.chorus"));
  EXPECT_EQ(d["guard"]["rows"], 400);
  EXPECT_LT(d["delta"]["nll"].get<double>(), 0);
  // On its own test split the candidate scores exactly what its run reported.
  const json report = json::parse(ReadTextFile(better_ + "/report.json"));
  for (const char* metric : {"accuracy", "nll", "ece"}) {
    EXPECT_EQ(d["candidate"]["metrics"][metric], report["ensemble"]["test"][metric]) << metric;
  }
  EXPECT_EQ(ReadTextFile(registry_ + "/current/report.json"),
            ReadTextFile(better_ + "/report.json"));
  // Both runs trained on the same rows: every column compared, none shifted.
  EXPECT_TRUE(d["shift"]["skipped"].is_null()) << d["shift"].dump();
  EXPECT_EQ(d["shift"]["columns_compared"], 7);
  EXPECT_EQ(d["shift"]["most_shifted"][0]["psi"], 0.0);
  EXPECT_EQ(d["shift"]["labels"]["psi"], 0.0);
  EXPECT_EQ(d["shift"]["refusals"], json::array());
}

// A run on the same rows with motor_temp_c raised by 15 degrees: the gate names that column
// and refuses it above --max-psi (0.25 by default), or above --max-ks when set.
TEST_F(PromoteTest, ShiftedTrainingDataIsRefusedAndItsColumnNamed) {
  const std::string dir = fs::path(registry_).parent_path().string();
  const std::string data = DemoDataOf(weaker_);
  fs::create_directories(dir + "/data");
  for (const char* f : {"alarms_test.csv", "alarms_test_probabilities.csv"}) {
    fs::copy_file(data + "/" + f, dir + "/data/" + f);
  }
  std::istringstream train(ReadTextFile(data + "/alarms_train.csv"));
  std::string shifted, line;
  std::getline(train, line);
  shifted = line + "\n";
  ASSERT_EQ(line.find("station,vibration_mm_s,motor_temp_c,"), 0u) << line;
  while (std::getline(train, line)) {
    std::vector<std::string> f;
    std::istringstream fields(line);
    for (std::string v; std::getline(fields, v, ',');) f.push_back(v);
    f[2] = std::to_string(std::stod(f[2]) + 15);
    for (size_t i = 0; i < f.size(); ++i) shifted += (i ? "," : "") + f[i];
    shifted += "\n";
  }
  testing::WriteTextFile(dir + "/data/alarms_train.csv", shifted);
  const std::string run =
      testing::RunDemo(dir, "shifted", testing::DemoClassificationYaml("shifted", 2, testing::kWeakerRunSettings));
  ASSERT_FALSE(run.empty());

  ASSERT_EQ(Promote(weaker_).exit_code, 0);
  const std::string current = CurrentTarget();
  auto r = Promote(run);
  EXPECT_EQ(r.exit_code, 3) << r.output;
  EXPECT_NE(r.output.find("most shifted motor_temp_c PSI"), std::string::npos) << r.output;
  EXPECT_EQ(CurrentTarget(), current);
  const std::vector<std::string> refused = Entries("refused");
  ASSERT_EQ(refused.size(), 1u);
  json d = json::parse(ReadTextFile(registry_ + "/refused/" + refused[0]));
  const json& most = d["shift"]["most_shifted"];
  EXPECT_EQ(most[0]["column"], "motor_temp_c");
  EXPECT_GT(most[0]["psi"].get<double>(), 0.25);
  EXPECT_GT(most[0]["ks"].get<double>(), 0.5);
  EXPECT_EQ(most[1]["psi"], 0.0);  // the other columns hold the same rows
  EXPECT_EQ(d["shift"]["labels"]["psi"], 0.0);
  EXPECT_EQ(d["shift"]["rows"]["candidate"], 1200);
  ASSERT_EQ(d["shift"]["refusals"].size(), 1u);
  EXPECT_EQ(d["shift"]["refusals"][0].get<std::string>().find(
                "data shift: PSI above 0.250 (--max-psi) in 1 of 7 columns: motor_temp_c"),
            0u);
  EXPECT_EQ(d["reasons"].back(), d["shift"]["refusals"][0]);

  // A KS limit refuses it too; with looser limits the decision is left to the scores.
  r = Promote(run, "--max-psi 100 --max-ks 0.3");
  EXPECT_EQ(r.exit_code, 3) << r.output;
  EXPECT_NE(r.output.find("KS above 0.300 (--max-ks) in 1 of 7 columns: motor_temp_c"),
            std::string::npos)
      << r.output;
  r = Promote(run, "--max-psi 100");
  d = json::parse(ReadTextFile(registry_ + "/" +
                               (r.exit_code == 0 ? "current/decision.json"
                                                 : "refused/" + Entries("refused").back())));
  EXPECT_EQ(d["shift"]["refusals"], json::array()) << r.output;
  for (const auto& reason : d["reasons"]) {
    EXPECT_EQ(reason.get<std::string>().find("data shift"), std::string::npos) << reason;
  }
}

// --refuse-if-baseline-better reads the candidate run's own verdict (report.json
// baseline.better_on_validation); a copy of a run with the verdict set either way stands in for
// runs whose data favours one side.
TEST_F(PromoteTest, BaselineFlagRefusesACandidateWhoseLinearBaselineWonOnValidation) {
  const std::string run = fs::path(registry_).parent_path().string() + "/baseline-won";
  fs::copy(better_, run, fs::copy_options::recursive);
  json report = json::parse(ReadTextFile(run + "/report.json"));
  ASSERT_TRUE(report["baseline"].contains("better_on_validation")) << report["baseline"];
  report["baseline"]["better_on_validation"] = true;
  testing::WriteTextFile(run + "/report.json", report.dump());
  const auto refused = Promote(run, "--refuse-if-baseline-better");
  EXPECT_EQ(refused.exit_code, 3) << refused.output;
  EXPECT_TRUE(CurrentTarget().empty()) << "an empty registry stays empty";
  const std::vector<std::string> decisions = Entries("refused");
  ASSERT_EQ(decisions.size(), 1u);
  const json d = json::parse(ReadTextFile(registry_ + "/refused/" + decisions[0]));
  EXPECT_NE(d["reasons"].back().get<std::string>().find("linear baseline beat the ensemble"), std::string::npos)
      << d["reasons"];
  EXPECT_EQ(d["limits"]["refuse_if_baseline_better"], true);
  report["baseline"]["better_on_validation"] = false;
  testing::WriteTextFile(run + "/report.json", report.dump());
  const auto promoted = Promote(run, "--refuse-if-baseline-better");
  EXPECT_EQ(promoted.exit_code, 0) << promoted.output;
  EXPECT_FALSE(CurrentTarget().empty());
}

TEST_F(PromoteTest, WorseCandidateIsRefusedAndCurrentUntouched) {
  ASSERT_EQ(Promote(better_).exit_code, 0);
  const std::string target = CurrentTarget();
  const std::string bytes = ReadTextFile(registry_ + "/current/bundle.chorus");

  const auto r = Promote(weaker_);
  EXPECT_EQ(r.exit_code, 3) << r.output;
  EXPECT_EQ(CurrentTarget(), target);
  EXPECT_EQ(ReadTextFile(registry_ + "/current/bundle.chorus"), bytes);
  EXPECT_EQ(Entries("versions").size(), 1u);
  const std::vector<std::string> refused = Entries("refused");
  ASSERT_EQ(refused.size(), 1u);
  const json d = json::parse(ReadTextFile(registry_ + "/refused/" + refused[0]));
  EXPECT_EQ(d["verdict"], "refuse");
  EXPECT_EQ("versions/" + d["current"]["version"].get<std::string>(), target);
  ASSERT_FALSE(d["reasons"].empty());
  EXPECT_EQ(d["reasons"][0].get<std::string>().rfind("nll ", 0), 0u) << d["reasons"];
  EXPECT_GT(d["delta"]["nll"].get<double>(), 0.01);

  // Promoting the current bundle again changes nothing.
  EXPECT_EQ(Promote(better_).exit_code, 0);
  EXPECT_EQ(Entries("versions").size(), 1u);
  EXPECT_EQ(CurrentTarget(), target);
}

TEST_F(PromoteTest, CrashBetweenCopyAndSwitchLeavesCurrentComplete) {
  for (const char* stage : {"after_copy", "before_switch_rename"}) {
    SCOPED_TRACE(stage);
    fs::remove_all(registry_);
    ASSERT_EQ(Promote(weaker_).exit_code, 0);
    const std::string target = CurrentTarget();
    const auto crashed = Promote(better_, "", std::string("CHORUS_PROMOTE_CRASH_AT=") + stage);
    EXPECT_EQ(crashed.exit_code, 128 + SIGKILL) << crashed.output;
    EXPECT_EQ(CurrentTarget(), target);
    EXPECT_EQ(Sha256Of(registry_ + "/current/bundle.chorus"), Sha256Of(weaker_ + "/bundle.chorus"));

    const auto r = Promote(better_);  // a later promote works, and tidies up
    ASSERT_EQ(r.exit_code, 0) << r.output;
    EXPECT_EQ(Sha256Of(registry_ + "/current/bundle.chorus"), Sha256Of(better_ + "/bundle.chorus"));
    for (const auto& e : fs::directory_iterator(registry_)) {
      EXPECT_EQ(e.path().filename().string().rfind("current.tmp", 0), std::string::npos);
    }
  }
}

TEST_F(PromoteTest, KeepsTheLastVersions) {
  const std::string loose = "--keep 2 --max-nll-increase 10 --max-accuracy-drop 1 "
                            "--max-ece-increase 1";
  for (const std::string& run : {weaker_, better_, weaker_, better_}) {
    const auto r = Promote(run, loose);
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }
  const std::vector<std::string> versions = Entries("versions");
  ASSERT_EQ(versions.size(), 2u);
  EXPECT_EQ(CurrentTarget(), "versions/" + versions[1]);
  EXPECT_EQ(Sha256Of(registry_ + "/current/bundle.chorus"), Sha256Of(better_ + "/bundle.chorus"));
}

TEST_F(PromoteTest, RegressionGateUsesNllAndRmse) {
  ASSERT_FALSE(better_regression_.empty() || weaker_regression_.empty());
  ASSERT_EQ(Promote(weaker_regression_).exit_code, 0);
  auto r = Promote(better_regression_);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const json d = CurrentDecision();
  EXPECT_EQ(d["limits"], json({{"max_nll_increase", 0.01}, {"max_rmse_increase", 0.02},
                               {"refuse_if_baseline_better", false}, {"max_psi", 0.25},
                               {"max_ks", 1.0}}));
  const json report = json::parse(ReadTextFile(better_regression_ + "/report.json"));
  for (const char* metric : {"rmse", "nll", "coverage_90"}) {
    EXPECT_EQ(d["candidate"]["metrics"][metric], report["ensemble"]["test"][metric]) << metric;
  }
  r = Promote(weaker_regression_);
  EXPECT_EQ(r.exit_code, 3) << r.output;
  EXPECT_NE(r.output.find("--max-rmse-increase"), std::string::npos) << r.output;
}

TEST_F(PromoteTest, BadInputExitsTwo) {
  EXPECT_EQ(Promote(DemoDataOf(better_)).exit_code, 2);  // no bundle.chorus
  EXPECT_EQ(Promote(better_, "--guard-labels x").exit_code, 2);
  EXPECT_EQ(Promote(better_, "--guard " + DemoDataOf(better_) + "/missing.csv").exit_code, 2);
  ASSERT_EQ(Promote(better_).exit_code, 0);
  const auto r = Promote(better_regression_);  // the current bundle is a classifier
  EXPECT_EQ(r.exit_code, 2) << r.output;
  EXPECT_NE(r.output.find("current bundle"), std::string::npos) << r.output;
}

TEST_F(PromoteTest, GuardFileAndJsonLog) {
  // The first 100 test rows, as a separate guard file.
  std::istringstream in(ReadTextFile(DemoDataOf(better_) + "/alarms_test.csv"));
  std::string guard, line;
  for (int i = 0; i <= 100 && std::getline(in, line); ++i) guard += line + "\n";
  testing::WriteTextFile(registry_ + "-guard.csv", guard);
  const auto r = Promote(better_, "--guard " + registry_ + "-guard.csv --log-format json");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  EXPECT_EQ(CurrentDecision()["guard"]["rows"], 100);
  std::istringstream lines(r.output);
  int parsed = 0;
  for (std::string l; std::getline(lines, l); ++parsed) {
    const json j = json::parse(l, nullptr, false);
    ASSERT_TRUE(j.is_object()) << l;
    EXPECT_TRUE(j.contains("time") && j.contains("level") && j.contains("msg")) << l;
  }
  EXPECT_GE(parsed, 2);
}

TEST_F(PromoteTest, ConcurrentPromoteWaitsForTheLock) {
  fs::create_directories(registry_);
  const int fd = ::open((registry_ + "/.lock").c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  ASSERT_GE(fd, 0);
  ASSERT_EQ(::flock(fd, LOCK_EX), 0);  // as another promote would hold it
  const std::string log = registry_ + "-promote.log";
  testing::BackgroundProcess promote(
      {testing::BinaryPath("chorus"), "promote", better_, "--registry", registry_}, log);
  EXPECT_TRUE(testing::WaitFor(
      [&] {
        return fs::exists(log) &&
               ReadTextFile(log).find("waiting for another promote") != std::string::npos;
      },
      30));
  EXPECT_EQ(promote.Wait(0.2), -1);  // still waiting
  EXPECT_FALSE(fs::exists(registry_ + "/current"));
  ::close(fd);
  EXPECT_EQ(promote.Wait(60), 0) << ReadTextFile(log);
  EXPECT_TRUE(fs::exists(registry_ + "/current/bundle.chorus"));
}

}  // namespace promote_test
}  // namespace chorus
