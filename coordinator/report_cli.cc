// `chorus report RUN_DIR`: rewrites a run's report.html from its report.json (coordinator/
// report/report_model.h); nothing is recomputed from the run's jobs.
#include <cstdio>
#include <memory>
#include <string>

#include "coordinator/command.h"
#include "coordinator/report_files.h"
#include "report/report_model.h"

namespace chorus {
namespace {

int ReportCommand(const std::string& run_dir) {
  StatusOr<nlohmann::json> report = ReadRunReport(run_dir);
  Status st = report.status();
  if (st.ok()) st = WriteReportFiles(run_dir, std::move(report).value());
  if (!st.ok()) {
    std::fprintf(stderr, "chorus report: %s\n", st.ToString().c_str());
    return st.ExitCode();
  }
  std::printf("wrote %s/report.html\n", run_dir.c_str());
  return 0;
}

}  // namespace

void RegisterReportCommand(CLI::App& app, CommandRunner* runner) {
  auto run_dir = std::make_shared<std::string>();
  CLI::App* cmd = app.add_subcommand(
      "report",
      "Rewrite RUN_DIR/report.html from RUN_DIR/report.json alone: reading report.json is\n"
      "enough, nothing is recomputed from jobs/. The page is one self-contained file (inline SVG\n"
      "charts, no scripts, nothing from the network). If RUN_DIR/manifest.json exists, its facts\n"
      "(workers seen, timings, version) are first stored in report.json under \"manifest\".\n"
      "Exit 2 if report.json is missing or malformed (only complete runs have one).");
  cmd->add_option("RUN_DIR", *run_dir, "a run directory written by `chorus run`")->required();
  cmd->callback([runner, run_dir] { *runner = [run_dir] { return ReportCommand(*run_dir); }; });
}

}  // namespace chorus
