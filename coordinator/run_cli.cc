// `chorus run`: command-line options for RunCommand (coordinator/run_command.h).
#include <cstdio>
#include <memory>

#include "common/log_format.h"
#include "coordinator/command.h"
#include "coordinator/run_command.h"

namespace chorus {

void RegisterRunCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<RunOptions>();
  CLI::App* cmd = app.add_subcommand(
      "run", "Train every member of CONFIG, assemble the ensemble, tune its temperature on\n"
             "validation, score it on test beside a linear baseline, and write a run directory\n"
             "(config.yaml, manifest.json, jobs/, events.jsonl, report.json, report.html,\n"
             "bundle.chorus). Jobs run in stages: the search grid (with `search`), fold jobs\n"
             "(k-fold cross-fitting, by default for small data), then the members.");
  cmd->add_option("CONFIG", options->config_path, "YAML config file (not needed with --resume)");
  cmd->add_option("--resume", options->resume_dir,
                  "continue RUN_DIR after an interruption: finished jobs are kept, the rest run");
  cmd->add_option("--out", options->out_dir, "parent directory for the run directory (default: run.out_dir)");
  cmd->add_option("--threads", options->threads,
                  "members trained at once (default: compute.threads; 0 = all cores)")
      ->check(CLI::Range(0, 4096));
  cmd->add_option("--workers", options->workers,
                  "local worker processes (default: cluster.local_workers; 0 with no cluster.listen "
                  "= train in this process)")
      ->check(CLI::Range(0, 4096));
  cmd->add_flag("--no-memory-check", options->skip_memory_check,
                "run even when the estimated memory need exceeds this machine's memory");
  SetRunnerWithLogFormat(
      cmd, runner,
      [options] {
        if (options->config_path.empty() == options->resume_dir.empty()) {
          LogPrintf(stderr, LogLevel::kError, "chorus run: give either CONFIG or --resume RUN_DIR");
          return 2;
        }
        return RunCommand(*options);
      },
      "; the embedded workers' worker.log too");
}

}  // namespace chorus
