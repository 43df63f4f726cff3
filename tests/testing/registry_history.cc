#include "tests/testing/registry_history.h"

#include "tests/testing/demo_runs.h"
#include "tests/testing/process.h"

namespace chorus::testing {

std::string MakeRegistryWithHistory(const std::string& dir) {
  const std::string better = SharedPromoteRun(PromoteRun::kBetter);
  const std::string weaker = SharedPromoteRun(PromoteRun::kWeaker);
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
