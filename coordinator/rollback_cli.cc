// `chorus rollback`: command-line options for RollbackCommand (coordinator/rollback_command.h).
#include <memory>
#include <string>

#include "coordinator/command.h"
#include "coordinator/rollback_command.h"

namespace chorus {

void RegisterRollbackCommand(CLI::App& app, CommandRunner* runner) {
  auto options = std::make_shared<RollbackOptions>();
  CLI::App* cmd = app.add_subcommand(
      "rollback",
      "Point the registry's current at an earlier version: by default the newest one older\n"
      "than the current that no earlier rollback moved away from (run it again to go further\n"
      "back), or --to ID. The version's\n"
      "bundle checksum is verified first; the switch is atomic and recorded in\n"
      "DIR/rollbacks.jsonl. Prints the ID that is current afterwards.\n"
      "Exit 0 switched (or already current), 2 bad input (current untouched), 1 I/O failure.");
  cmd->add_option("--registry", options->registry_dir, "registry directory (as given to chorus promote)")
      ->required();
  cmd->add_option("--to", options->to, "the version ID to make current (a directory name under versions/)");
  SetRunnerWithLogFormat(cmd, runner, [options] { return RollbackCommand(*options); });
}

}  // namespace chorus
