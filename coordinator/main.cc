// The chorus command line: `chorus run CONFIG`. Later commands (predict, report, compare,
// promote, inspect) attach here as subcommands.
#include <CLI/CLI.hpp>

#include <cstdio>
#include <exception>

#include "coordinator/run_command.h"

int main(int argc, char** argv) {
  CLI::App app{
      "chorus: train ensembles of neural networks on CPUs and turn them into one calibrated,\n"
      "uncertainty-aware predictor.\n\nExit codes: 0 success, 1 internal failure, 2 bad input or "
      "usage,\n3 refused (too few members finished)."};
  app.require_subcommand(1);
  app.set_version_flag("--version", CHORUS_VERSION);

  chorus::RunOptions run;
  CLI::App* run_cmd = app.add_subcommand(
      "run", "Train every member of CONFIG, assemble the ensemble, tune its temperature on\n"
             "validation, score it on test, and write a run directory (config.yaml, manifest.json,\n"
             "jobs/, events.jsonl, report.json, report.html).");
  run_cmd->add_option("CONFIG", run.config_path, "YAML config file")->required();
  run_cmd->add_option("--out", run.out_dir, "parent directory for the run directory (default: run.out_dir)");
  run_cmd->add_option("--threads", run.threads,
                      "members trained at once (default: compute.threads; 0 = all cores)")
      ->check(CLI::Range(0, 4096));

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int rc = app.exit(e);
    return rc == 0 ? 0 : 2;
  }
  try {
    if (*run_cmd) return chorus::RunCommand(run);
  } catch (const std::exception& e) {
    std::fprintf(stderr, "chorus: internal error: %s\n", e.what());
    return 1;
  }
  return 1;
}
