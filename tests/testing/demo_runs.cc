#include "tests/testing/demo_runs.h"

#include <gtest/gtest.h>

#include <filesystem>

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

}  // namespace chorus::testing
