// A full disk, played by a file size limit (RLIMIT_FSIZE via `ulimit -f`, in KiB): the write that
// crosses it fails with "File too large" (chorus ignores SIGXFSZ), the command exits 1 naming the
// file, nothing half-written is left, and a run directory stays resumable: resumed without the
// limit it finishes with the same bytes as a run that never hit it.
#include <gtest/gtest.h>

#include <filesystem>
#include <map>

#include <nlohmann/json.hpp>

#include "tests/testing/process.h"
#include "tests/testing/reference.h"
#include "tests/testing/run_dir.h"

namespace chorus {
namespace file_size_limit_test {

namespace fs = std::filesystem;
using testing::RunShell;

class FileSizeLimitTest : public ::testing::Test {
 protected:
  void SetUp() override {
    dir_ = testing::MakeTempDir("chorus-fsize");
    const auto r = RunShell(testing::BinaryPath("chorus-demo-data") + " " + dir_ +
                            "/data --train-rows 1200 --test-rows 400");
    ASSERT_EQ(r.exit_code, 0) << r.output;
    config_ = dir_ + "/fsize.yaml";
    testing::WriteTextFile(config_, "run: {name: fsize, seed: 5}\n"
        "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
        "       categorical: [station], validation: {fraction: 0.2}}\n"
        "model: {hidden: [16]}\ntrain: {epochs: 2, batch_size: 64}\nensemble: {members: 2}\n");
  }
  void TearDown() override {
    if (!HasFailure()) fs::remove_all(dir_);
  }

  // Runs chorus with `args` under a file size limit of `kib` KiB (0: none).
  testing::CommandResult Chorus(const std::string& args, int kib = 0) {
    const std::string limit = kib > 0 ? "ulimit -f " + std::to_string(kib) + "; " : "";
    return RunShell(limit + testing::BinaryPath("chorus") + " " + args + " --threads 1", 300);
  }

  // Paths under `dir` whose name holds ".tmp-" (an atomic write's temporary file).
  static std::vector<std::string> Temporaries(const std::string& dir) {
    std::vector<std::string> found;
    for (const auto& e : fs::recursive_directory_iterator(dir)) {
      if (e.path().filename().string().find(".tmp-") != std::string::npos) found.push_back(e.path());
    }
    return found;
  }

  std::string dir_, config_;
};

// report.html (about 45 KiB here) crosses a 32 KiB limit; job results (about 15 KiB) do not.
TEST_F(FileSizeLimitTest, ARunStoppedByTheLimitFailsCleanlyAndResumesToTheSameBytes) {
  auto r = Chorus("run " + config_ + " --out " + dir_ + "/limited", 32);
  EXPECT_EQ(r.exit_code, 1) << r.output;
  EXPECT_NE(r.output.find("File too large"), std::string::npos) << r.output;
  const std::string run = testing::RunDirUnder(dir_ + "/limited");
  ASSERT_FALSE(run.empty());
  EXPECT_TRUE(Temporaries(run).empty());
  EXPECT_FALSE(fs::exists(run + "/bundle.chorus"));
  const nlohmann::json manifest = nlohmann::json::parse(testing::ReadTextFile(run + "/manifest.json"));
  EXPECT_EQ(manifest["status"], "failed");

  r = Chorus("run --resume " + run);
  ASSERT_EQ(r.exit_code, 0) << r.output;
  r = Chorus("run " + config_ + " --out " + dir_ + "/clean");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const std::string clean = testing::RunDirUnder(dir_ + "/clean");
  EXPECT_TRUE(testing::JobResults(run) == testing::JobResults(clean));
  EXPECT_EQ(testing::ReadTextFile(run + "/bundle.chorus"), testing::ReadTextFile(clean + "/bundle.chorus"));
}

TEST_F(FileSizeLimitTest, PredictStoppedByTheLimitExitsOneAndLeavesNoOutput) {
  auto r = Chorus("run " + config_ + " --out " + dir_ + "/runs");
  ASSERT_EQ(r.exit_code, 0) << r.output;
  const std::string bundle = testing::RunDirUnder(dir_ + "/runs") + "/bundle.chorus";
  const std::string out = dir_ + "/predictions.csv";
  r = Chorus("predict " + bundle + " " + dir_ + "/data/alarms_test.csv -o " + out, 8);
  EXPECT_EQ(r.exit_code, 1) << r.output;
  EXPECT_NE(r.output.find(out), std::string::npos) << r.output;
  EXPECT_NE(r.output.find("File too large"), std::string::npos) << r.output;
  EXPECT_FALSE(fs::exists(out));
  EXPECT_TRUE(Temporaries(dir_).empty());
}

}  // namespace file_size_limit_test
}  // namespace chorus
