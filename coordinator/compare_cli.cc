// `chorus compare RUN_A RUN_B`: two runs' report.json side by side (coordinator/run_comparison.h).
#include <cstdio>
#include <memory>
#include <string>

#include "coordinator/command.h"
#include "coordinator/run_comparison.h"
#include "report/report_model.h"

namespace chorus {
namespace {

struct CompareOptions {
  std::string run_a, run_b;
  bool json = false;
};

int CompareCommand(const CompareOptions& options) {
  StatusOr<nlohmann::json> a = ReadRunReport(options.run_a);
  StatusOr<nlohmann::json> b = a.ok() ? ReadRunReport(options.run_b) : a;
  if (!b.ok()) {
    std::fprintf(stderr, "chorus compare: %s\n", b.status().ToString().c_str());
    return b.status().ExitCode();
  }
  const RunComparison c = CompareReports(a.value(), b.value(), options.run_a, options.run_b);
  const std::string text = options.json ? ComparisonJson(c).dump(2) + "\n" : ComparisonTable(c);
  std::fputs(text.c_str(), stdout);
  return 0;
}

}  // namespace

void RegisterCompareCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<CompareOptions>();
  CLI::App* cmd = app.add_subcommand(
      "compare",
      "Show two runs' report.json side by side: ensemble test metrics before and after\n"
      "temperature, temperature, member counts, weights, with B - A deltas and which run is\n"
      "better, and whether data and config hashes are equal. Exit 2 if a run has no readable\n"
      "report.json.");
  cmd->add_option("RUN_A", options->run_a, "first run directory")->required();
  cmd->add_option("RUN_B", options->run_b, "second run directory")->required();
  cmd->add_flag("--json", options->json, "print JSON for machines instead of a table");
  cmd->callback([runner, options] { *runner = [options] { return CompareCommand(*options); }; });
}

}  // namespace chorus
