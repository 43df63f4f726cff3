// `chorus predict`: command-line options for PredictCommand (coordinator/predict_command.h).
#include <memory>

#include "coordinator/command.h"
#include "coordinator/predict_command.h"

namespace chorus {

void RegisterPredictCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<PredictOptions>();
  CLI::App* cmd = app.add_subcommand(
      "predict",
      "Write the ensemble's calibrated predictive for every row of INPUT to OUTPUT.csv.\n"
      "INPUT is a CSV file whose header names the bundle's columns (any order; extra columns\n"
      "and the target column are ignored) or an IDX images file (plain or gzip).\n"
      "Classification columns: line|index, predicted, p_<class>..., confidence,\n"
      "total_entropy, epistemic (mutual information; nats). Regression: line|index, mean,\n"
      "total_std, epistemic_std, q05, q95 (target units). Rows are streamed in batches;\n"
      "OUTPUT appears only when complete. An invalid row stops with exit 2 naming its\n"
      "file:line, unless --skip-bad-rows. Rows far outside the bundle's training data (a value\n"
      "more than half the training range beyond it, or a category never seen) are counted\n"
      "per batch on stderr with the columns at fault, or refused with --refuse-out-of-range.");
  cmd->add_option("BUNDLE", options->bundle_path, "bundle file (bundle.chorus of a run)")
      ->required();
  cmd->add_option("INPUT", options->input_path, "input rows: CSV or IDX")->required();
  cmd->add_option("-o,--output", options->output_path, "predictions CSV to write")->required();
  cmd->add_option("--format", options->format, "input format: auto (default), csv or idx")
      ->check(CLI::IsMember({"auto", "csv", "idx"}));
  cmd->add_flag("--skip-bad-rows", options->skip_bad_rows,
                "report invalid rows on stderr and leave them out, instead of stopping");
  cmd->add_flag("--refuse-out-of-range", options->refuse_out_of_range,
                "stop with exit 2, writing nothing, at the first batch with a row far outside "
                "the training data (default: report such rows and predict them)");
  cmd->add_option("--threads", options->threads,
                  "threads (default 0 = all cores); the output is the same for any count")
      ->check(CLI::Range(0, 4096));
  SetRunnerWithLogFormat(cmd, runner, [options] { return PredictCommand(*options); });
}

}  // namespace chorus
