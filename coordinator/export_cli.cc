// `chorus export`: command-line options for ExportCommand (coordinator/export_command.h).
#include <memory>

#include "coordinator/command.h"
#include "coordinator/export_command.h"

namespace chorus {

void RegisterExportCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<ExportOptions>();
  CLI::App* cmd = app.add_subcommand(
      "export",
      "Write the bundle's calibrated predictive as one ONNX model (IR version 8, operator set\n"
      "13) that computes, for every input row, what chorus predict computes from the drawn\n"
      "samples, ensemble weights and temperature.\n"
      "Input \"features\": float [N, F], the encoded features before standardisation (numeric\n"
      "columns as values, categorical columns one-hot over the vocabulary, in the order the\n"
      "model's metadata feature_names lists; IDX: the pixel values).\n"
      "Outputs (double): classification \"probabilities\" [N, K]; regression \"mean\" and\n"
      "\"variance\" [N] in target units. FILE appears only when complete.\n"
      "Exit 0 written, 2 bad input (missing or corrupt bundle, missing output directory,\n"
      "a model over 2 GiB), 1 I/O or internal failure.");
  cmd->add_option("BUNDLE", options->bundle_path, "bundle file (bundle.chorus of a run)")->required();
  cmd->add_option("--onnx", options->onnx_path, "ONNX model file to write")->required();
  SetRunnerWithLogFormat(cmd, runner, [options] { return ExportCommand(*options); });
}

}  // namespace chorus
