#include "tests/testing/registry_history.h"

#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"

namespace chorus::testing {

std::string MakeRegistryWithHistory(const std::string& dir) {
  // The promote tests' runs (same names and YAML, so SharedDemoRun trains them once per build).
  const std::string better = SharedDemoRun(
      "promote-better", DemoClassificationYaml(
                            "better", 1, "train: {epochs: 8}\nensemble: {members: 3}\ncluster: {local_workers: 0}\n"));
  const std::string weaker = SharedDemoRun(
      "promote-weaker", DemoClassificationYaml(
                            "weaker", 2, "train: {epochs: 2}\nensemble: {members: 1}\ncluster: {local_workers: 0}\n"));
  if (better.empty() || weaker.empty()) return "the demo runs failed";
  const std::string chorus = BinaryPath("chorus");
  const struct {
    std::string args;
    int exit_code;
  } steps[] = {{"promote " + weaker + " --registry " + dir, 0},
               {"promote " + better + " --registry " + dir, 0},
               {"promote " + weaker + " --registry " + dir, 3},
               {"rollback --registry " + dir, 0}};
  for (const auto& step : steps) {
    const CommandResult r = RunShell(chorus + " " + step.args, 120);
    if (r.exit_code != step.exit_code) {
      return "chorus " + step.args + ": exit " + std::to_string(r.exit_code) + ", expected " +
             std::to_string(step.exit_code) + ":\n" + r.output;
    }
  }
  return "";
}

}  // namespace chorus::testing
