// deploy/nightly.sh, the script chorus-nightly.service runs, adapted only through its
// environment: a first night promotes its bundle into an empty registry, a night with an equal
// candidate keeps it current, a worse candidate is refused (exit 3, `current` untouched), old run
// directories are pruned, and every line it and chorus log is one JSON object.
#include <gtest/gtest.h>

#include <algorithm>
#include <chrono>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <sstream>
#include <thread>

#include "proto/bundle_codec.h"
#include "tests/testing/process.h"
#include "tests/testing/reference.h"

namespace chorus {
namespace nightly_test {

namespace fs = std::filesystem;
using testing::RunShell;

class NightlyTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-nightly");
    const auto r = RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                            "/data --train-rows 600 --test-rows 200");
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // A config named `name` whose members have `hidden` units and train for `epochs`.
  std::string WriteConfig(const std::string& name, int hidden, int epochs) {
    const std::string path = dir_ + "/" + name + ".yaml";
    const std::string model = "model: {hidden: [" + std::to_string(hidden) + "]}\n";
    const std::string train = "train: {epochs: " + std::to_string(epochs) + ", batch_size: 32}\n";
    testing::WriteTextFile(
        path,
        "run: {name: " + name + ", seed: 4}\n" + model + train +
            "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
            "       categorical: [station]}\n"
            "ensemble: {members: 2}\ncluster: {local_workers: 2}\n");
    return path;
  }

  // One night: deploy/nightly.sh on `config`; returns its exit status. Its stderr must be JSON
  // lines. Waits for the next second first, as each night's directory is named by the second.
  int Night(const std::string& config) {
    std::this_thread::sleep_for(std::chrono::milliseconds(1100));
    const auto r = RunShell("CHORUS_CONFIG=" + config + " CHORUS_RUNS=" + dir_ + "/runs" +
                                " CHORUS_REGISTRY=" + dir_ + "/registry CHORUS_KEEP_RUNS=2" +
                                " CHORUS_BIN=" + CHORUS_BINARY_DIR + " " +
                                testing::SourcePath("deploy/nightly.sh") + " 2> " + dir_ + "/log",
                            120);
    std::istringstream lines(testing::ReadTextFile(dir_ + "/log"));
    for (std::string line; std::getline(lines, line);) {
      EXPECT_TRUE(nlohmann::json::parse(line, nullptr, false).is_object()) << line;
    }
    return r.exit_code;
  }

  std::string Current() { return fs::read_symlink(dir_ + "/registry/current").string(); }

  std::vector<fs::path> Nights() {
    std::vector<fs::path> nights;
    for (const auto& e : fs::directory_iterator(dir_ + "/runs")) nights.push_back(e.path());
    std::sort(nights.begin(), nights.end());
    return nights;
  }

  std::string dir_;
};

TEST_F(NightlyTest, PromotesKeepsRefusesAndPrunes) {
  const std::string good = WriteConfig("good", 32, 6);
  ASSERT_EQ(Night(good), 0) << testing::ReadTextFile(dir_ + "/log");
  const std::string first = Current();
  ASSERT_EQ(Nights().size(), 1u);
  for (const auto& run : fs::directory_iterator(Nights()[0])) {
    if (run.path().filename().string()[0] == '.' || !run.is_directory()) continue;  // data cache
    EXPECT_EQ(testing::ReadTextFile(dir_ + "/registry/" + first + "/bundle.chorus"),
              testing::ReadTextFile((run.path() / "bundle.chorus").string()));
  }

  // The same config again: the same bundle, already current.
  EXPECT_EQ(Night(good), 0) << testing::ReadTextFile(dir_ + "/log");
  EXPECT_EQ(Current(), first);

  // A much smaller, shorter-trained ensemble: refused, current stays.
  EXPECT_EQ(Night(WriteConfig("worse", 2, 1)), 3) << testing::ReadTextFile(dir_ + "/log");
  EXPECT_EQ(Current(), first);
  EXPECT_FALSE(fs::is_empty(dir_ + "/registry/refused"));
  // CHORUS_KEEP_RUNS=2: the first night's run directory is gone.
  EXPECT_EQ(Nights().size(), 2u);
  EXPECT_NE(testing::ReadTextFile(dir_ + "/log").find("the gate refused"), std::string::npos);
  // Each night redrew the registry's history: the promotion and the refusal (the second night's
  // bundle was already current, so it made no decision).
  EXPECT_NE(testing::ReadTextFile(dir_ + "/registry/history.html").find("2 decisions (1 promoted, 1 refused)"),
            std::string::npos);
}

// The whole loop in one pass per night, as deploy/systemd/nightly.yaml sets it up: the first
// night starts cold (the registry is empty), is promoted and exported to ONNX; the second starts
// from the current bundle through the local workers' lease replies, the gate compares its
// training data with the current bundle's, and the history page shows both nights.
TEST_F(NightlyTest, WarmStartShiftCheckExportAndHistoryInOnePass) {
  const std::string config = dir_ + "/loop.yaml";
  testing::WriteTextFile(
      config,
      "run: {name: loop, seed: 4}\nmodel: {hidden: [32]}\n"
      "train: {epochs: 6, batch_size: 32, warm_start: " + dir_ + "/registry, warm_epochs: 2}\n"
      "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
      "       categorical: [station]}\n"
      "ensemble: {members: 2}\ncluster: {local_workers: 2}\n");
  ASSERT_EQ(Night(config), 0) << testing::ReadTextFile(dir_ + "/log");
  std::string log = testing::ReadTextFile(dir_ + "/log");
  EXPECT_NE(log.find("has no current bundle yet; training from scratch"), std::string::npos) << log;
  const std::string onnx = dir_ + "/registry/current.onnx";
  const auto sha_of_current = [&] {
    return ReadBundleFile(dir_ + "/registry/current/bundle.chorus").value().payload_sha256;
  };
  // The model's metadata names the bundle it was exported from (docs/onnx_export.md).
  ASSERT_TRUE(fs::exists(onnx));
  EXPECT_NE(testing::ReadTextFile(onnx).find(sha_of_current()), std::string::npos);

  const int second = Night(config);
  log = testing::ReadTextFile(dir_ + "/log");
  ASSERT_TRUE(second == 0 || second == 3) << log;
  EXPECT_NE(log.find("warm start from " + dir_ + "/registry/versions/"), std::string::npos) << log;
  // The second night's decision compared the two nights' training data: the same rows.
  std::vector<fs::path> decisions;
  for (const auto& v : fs::directory_iterator(dir_ + "/registry/versions")) {
    decisions.push_back(v.path() / "decision.json");
  }
  if (fs::exists(dir_ + "/registry/refused")) {
    for (const auto& r : fs::directory_iterator(dir_ + "/registry/refused")) decisions.push_back(r.path());
  }
  ASSERT_EQ(decisions.size(), 2u);
  bool compared = false;
  for (const fs::path& d : decisions) {
    const nlohmann::json j = nlohmann::json::parse(testing::ReadTextFile(d.string()));
    if (!j["shift"]["skipped"].is_null()) continue;
    compared = true;
    EXPECT_EQ(j["shift"]["columns_compared"], 7);
    EXPECT_EQ(j["shift"]["most_shifted"][0]["psi"], 0.0);
    EXPECT_EQ(j["shift"]["refusals"], nlohmann::json::array());
  }
  EXPECT_TRUE(compared);
  // Promoted: the ONNX model follows; refused: it stays the first night's.
  EXPECT_NE(testing::ReadTextFile(onnx).find(sha_of_current()), std::string::npos);
  const std::string page = testing::ReadTextFile(dir_ + "/registry/history.html");
  EXPECT_NE(page.find("2 decisions ("), std::string::npos);
  EXPECT_NE(page.find("largest PSI"), std::string::npos);
}

}  // namespace nightly_test
}  // namespace chorus
