#include "tests/testing/demo_runs.h"

#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <gtest/gtest.h>

#include <filesystem>

#include "common/sha256.h"
#include "tests/testing/process.h"

namespace chorus::testing {

void WriteDemoData(const std::string& dir) {
  const CommandResult r = RunShell(BinaryPath("chorus-demo-data") + " " + dir +
                                   "/data --train-rows 1200 --test-rows 400");
  EXPECT_EQ(r.exit_code, 0) << r.output;
}

std::string DemoClassificationYaml(const std::string& name, int seed, const std::string& extra) {
  return "run: {name: " + name + ", seed: " + std::to_string(seed) +
         "}\n"
         "data: {train: data/alarms_train.csv, test: data/alarms_test.csv, target: cause,\n"
         "       categorical: [station], true_probabilities: data/alarms_test_probabilities.csv}\n"
         "model: {hidden: [16]}\n" +
         extra;
}

std::string DemoRegressionYaml(const std::string& name, int seed, const std::string& extra) {
  return "run: {name: " + name + ", seed: " + std::to_string(seed) +
         "}\n"
         "data: {train: data/faults_train.csv, test: data/faults_test.csv, target: "
         "hours_to_fault,\n"
         "       task: regression, categorical: [station]}\n"
         "model: {hidden: [16], activation: tanh}\n" +
         extra;
}

std::string RunDemo(const std::string& dir, const std::string& name, const std::string& yaml) {
  const std::string config = dir + "/" + name + ".yaml", out = dir + "/runs-" + name;
  WriteTextFile(config, yaml);
  const CommandResult r = RunShell(BinaryPath("chorus") + " run " + config + " --out " + out, 300);
  EXPECT_EQ(r.exit_code, 0) << r.output;
  if (r.exit_code != 0 || !std::filesystem::is_directory(out)) return "";
  for (const auto& entry : std::filesystem::directory_iterator(out)) {
    if (std::filesystem::exists(entry.path() / "manifest.json")) return entry.path().string();
  }
  ADD_FAILURE() << "no run directory under " << out;
  return "";
}

namespace {

// Size and modification time of an executable: a rebuilt one changes the shared runs' key.
std::string ExecutableIdentity(const std::string& name) {
  namespace fs = std::filesystem;
  const fs::path path = BinaryPath(name);
  std::error_code ec;
  const auto size = fs::file_size(path, ec);
  const auto time = fs::last_write_time(path, ec).time_since_epoch().count();
  return name + " " + std::to_string(size) + " " + std::to_string(time);
}

}  // namespace

std::string SharedDemoRun(const std::string& name, const std::string& yaml) {
  namespace fs = std::filesystem;
  const std::string key = yaml + "\n" + ExecutableIdentity("chorus") + "\n" +
                          ExecutableIdentity("chorus-demo-data");
  const std::string dir = std::string(CHORUS_BINARY_DIR) + "/test-runs/" + name + "-" +
                          Sha256Hex(key.data(), key.size()).substr(0, 16);
  fs::create_directories(dir);
  const int lock = ::open((dir + ".lock").c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (lock < 0 || ::flock(lock, LOCK_EX) != 0) {
    ADD_FAILURE() << "cannot lock " << dir << ".lock";
    if (lock >= 0) ::close(lock);
    return "";
  }
  // The marker holds the run directory. A run interrupted half-way (a killed test) has none and
  // is made again from scratch.
  const std::string marker = dir + "/complete";
  if (!fs::exists(marker)) {
    for (const auto& entry : fs::directory_iterator(dir)) fs::remove_all(entry.path());
    WriteDemoData(dir);
    const std::string run = RunDemo(dir, name, yaml);
    if (!run.empty()) WriteTextFile(marker, run);
  }
  ::close(lock);  // releases the lock
  return fs::exists(marker) ? ReadTextFile(marker) : "";
}

std::string SharedPromoteRun(PromoteRun which) {
  const char* better = kBetterRunSettings;
  const char* weaker = kWeakerRunSettings;
  switch (which) {
    case PromoteRun::kBetter:
      return SharedDemoRun("promote-better", DemoClassificationYaml("better", 1, better));
    case PromoteRun::kWeaker:
      return SharedDemoRun("promote-weaker", DemoClassificationYaml("weaker", 2, weaker));
    case PromoteRun::kBetterRegression:
      return SharedDemoRun("promote-better_regression",
                           DemoRegressionYaml("better_regression", 1, better));
    case PromoteRun::kWeakerRegression:
      return SharedDemoRun("promote-weaker_regression",
                           DemoRegressionYaml("weaker_regression", 2, weaker));
  }
  return "";
}

}  // namespace chorus::testing
