// How each `chorus` subcommand plugs into the command line: a command file defines one
// Register*Command function that adds its CLI11 subcommand and, when that subcommand is chosen,
// sets the runner main() calls. One file per command keeps commands independent.
// Thread safety: used from main's thread only.
#pragma once

#include <CLI/CLI.hpp>

#include <functional>
#include <string>

namespace chorus {

// Returns the process exit code (0 ok, 1 internal, 2 bad input, 3 refused).
using CommandRunner = std::function<int()>;

// Adds --log-format (text | json: one object per line with time, level, msg, fields; `more`
// is appended to that help text) to `cmd`, and makes `run`, called once the format is set, the
// runner when `cmd` is chosen.
void SetRunnerWithLogFormat(CLI::App* cmd, CommandRunner* runner, CommandRunner run,
                            const std::string& more = "");

void RegisterRunCommand(CLI::App& app, CommandRunner* runner);
void RegisterPredictCommand(CLI::App& app, CommandRunner* runner);
void RegisterInspectCommand(CLI::App& app, CommandRunner* runner);
void RegisterReportCommand(CLI::App& app, CommandRunner* runner);
void RegisterCompareCommand(CLI::App& app, CommandRunner* runner);
void RegisterPromoteCommand(CLI::App& app, CommandRunner* runner);
void RegisterRollbackCommand(CLI::App& app, CommandRunner* runner);
void RegisterHistoryCommand(CLI::App& app, CommandRunner* runner);
void RegisterReferenceCommand(CLI::App& app, CommandRunner* runner);
void RegisterExportCommand(CLI::App& app, CommandRunner* runner);

}  // namespace chorus
