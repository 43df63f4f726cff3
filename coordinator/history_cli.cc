// `chorus history`: command-line options for HistoryCommand (coordinator/history_command.h).
#include <memory>
#include <string>

#include "coordinator/command.h"
#include "coordinator/history_command.h"

namespace chorus {

void RegisterHistoryCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<HistoryOptions>();
  CLI::App* cmd = app.add_subcommand(
      "history",
      "Write one self-contained HTML page of a registry's history: every gate decision it keeps\n"
      "(time, verdict, version, run, guard data, the candidate's and the current bundle's guard\n"
      "metrics, the reasons), charts of guard NLL and accuracy (or RMSE) over the decisions, and\n"
      "every rollback. Reads the registry without changing it. Prints the page's path.\n"
      "Exit 0 written, 2 bad input (not a registry, a record chorus did not write), 1 I/O failure.");
  cmd->add_option("--registry", options->registry_dir, "registry directory (as given to chorus promote)")
      ->required();
  cmd->add_option("-o,--out", options->out, "the page to write (default DIR/history.html)");
  SetRunnerWithLogFormat(cmd, runner, [options] { return HistoryCommand(*options); });
}

}  // namespace chorus
