// `chorus promote`: command-line options for PromoteCommand (coordinator/promote_command.h).
#include <cstdio>
#include <memory>
#include <string>

#include "coordinator/command.h"
#include "coordinator/promote_command.h"

namespace chorus {
namespace {

// "... (default 0.01)" from the in-class default, so help and code cannot disagree.
std::string WithDefault(const std::string& text, double value) {
  char number[32];
  std::snprintf(number, sizeof number, "%g", value);
  return text + " (default " + number + ")";
}

void AddLimitOptions(CLI::App* cmd, GateLimits* limits) {
  const GateLimits d;
  cmd->add_option("--max-nll-increase", limits->max_nll_increase,
                  WithDefault("most the guard NLL may rise, nats", d.max_nll_increase))
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--max-accuracy-drop", limits->max_accuracy_drop,
                  WithDefault("classification: most the accuracy may fall, a fraction",
                              d.max_accuracy_drop))
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--max-ece-increase", limits->max_ece_increase,
                  WithDefault("classification: most the ECE may rise, a fraction",
                              d.max_ece_increase))
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--max-rmse-increase", limits->max_rmse_increase,
                  WithDefault("regression: most the RMSE may rise, a fraction of the current "
                              "bundle's RMSE",
                              d.max_rmse_increase))
      ->check(CLI::NonNegativeNumber);
  cmd->add_flag("--refuse-if-baseline-better", limits->refuse_if_baseline_better,
                "refuse the candidate when its run's linear baseline had the lower validation NLL "
                "(report.json baseline.better_on_validation), or when its report has no baseline");
  cmd->add_option("--max-psi", limits->max_psi,
                  WithDefault("most any input column's, or the labels', population stability "
                              "index may reach against the current bundle's training data "
                              "(0.1 / 0.25: some / significant shift, common practice)",
                              d.max_psi))
      ->check(CLI::NonNegativeNumber);
  cmd->add_option("--max-ks", limits->max_ks,
                  WithDefault("most any numeric column's, or the regression target's, "
                              "Kolmogorov-Smirnov statistic may reach against the current "
                              "bundle's training data; 1 = no limit",
                              d.max_ks))
      ->check(CLI::Range(0.0, 1.0));
}

}  // namespace

void RegisterPromoteCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<PromoteOptions>();
  CLI::App* cmd = app.add_subcommand(
      "promote",
      "Score RUN_DIR's bundle and the registry's current bundle on the same guard data (the\n"
      "run's test split, or --guard), and make the run's bundle current only if it is no\n"
      "worse than the limits allow: classification NLL, accuracy, ECE; regression NLL, RMSE\n"
      "(coverage_90 is reported); and only if its training data has not shifted from the\n"
      "current bundle's past --max-psi / --max-ks (both bundles carry a summary of it).\n"
      "The decision is written as JSON into the registry. The first\n"
      "bundle into an empty registry passes (\"no current bundle\"). Registry DIR:\n"
      "current -> versions/ID/{bundle.chorus, decision.json, report.json}; refused/ID.json.\n"
      "Exit 0 promoted (or already current), 3 refused (current untouched), 2 bad input.");
  cmd->add_option("RUN_DIR", options->run_dir, "run directory with bundle.chorus and config.yaml")
      ->required();
  cmd->add_option("--registry", options->registry_dir, "registry directory (created if missing)")
      ->required();
  cmd->add_option("--guard", options->guard.file,
                  "guard data instead of the run's test split: a labelled CSV with the run's "
                  "columns, or (idx runs) an images file");
  cmd->add_option("--guard-labels", options->guard.labels, "idx runs: the --guard labels file");
  AddLimitOptions(cmd, &options->limits);
  cmd->add_option("--keep", options->keep,
                  "versions kept in the registry; older ones are removed, never the current "
                  "(default 10)")
      ->check(CLI::Range(1, 1000000));
  cmd->add_option("--threads", options->threads,
                  "scoring threads (default 0 = all cores); the result is the same for any count")
      ->check(CLI::Range(0, 4096));
  SetRunnerWithLogFormat(cmd, runner, [options] { return PromoteCommand(*options); });
}

}  // namespace chorus
