// `chorus run`: command-line options for RunCommand (coordinator/run_command.h).
#include <memory>

#include "coordinator/command.h"
#include "coordinator/run_command.h"

namespace chorus {

void RegisterRunCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<RunOptions>();
  CLI::App* cmd = app.add_subcommand(
      "run", "Train every member of CONFIG, assemble the ensemble, tune its temperature on\n"
             "validation, score it on test, and write a run directory (config.yaml, manifest.json,\n"
             "jobs/, events.jsonl, report.json, report.html).");
  cmd->add_option("CONFIG", options->config_path, "YAML config file")->required();
  cmd->add_option("--out", options->out_dir, "parent directory for the run directory (default: run.out_dir)");
  cmd->add_option("--threads", options->threads,
                  "members trained at once (default: compute.threads; 0 = all cores)")
      ->check(CLI::Range(0, 4096));
  cmd->callback([runner, options] { *runner = [options] { return RunCommand(*options); }; });
}

}  // namespace chorus
