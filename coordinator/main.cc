// The chorus command line. Each subcommand lives in its own *_cli.cc file and registers itself
// here (coordinator/command.h).
#include <csignal>
#include <cstdio>
#include <exception>

#include "common/heap_tuning.h"
#include "coordinator/command.h"

int main(int argc, char** argv) {
  // Past a file size limit (RLIMIT_FSIZE) a write fails with EFBIG instead of killing the process,
  // so the atomic writer removes its temporary file and the error names the file.
  std::signal(SIGXFSZ, SIG_IGN);
  chorus::KeepFreedHeapMemoryForReuse();
  CLI::App app{
      "chorus: train ensembles of neural networks on CPUs and turn them into one calibrated,\n"
      "uncertainty-aware predictor.\n\nExit codes: 0 success, 1 internal failure, 2 bad input or "
      "usage,\n3 refused (too few members finished, or a gate said no)."};
  app.require_subcommand(1);
  app.set_version_flag("--version", CHORUS_VERSION);
  chorus::CommandRunner runner;
  chorus::RegisterRunCommand(app, &runner);
  chorus::RegisterPredictCommand(app, &runner);
  chorus::RegisterInspectCommand(app, &runner);
  chorus::RegisterReportCommand(app, &runner);
  chorus::RegisterCompareCommand(app, &runner);
  chorus::RegisterPromoteCommand(app, &runner);
  chorus::RegisterRollbackCommand(app, &runner);
  chorus::RegisterHistoryCommand(app, &runner);
  chorus::RegisterReferenceCommand(app, &runner);
  chorus::RegisterExportCommand(app, &runner);
  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    const int rc = app.exit(e);
    return rc == 0 ? 0 : 2;
  }
  try {
    return runner ? runner() : 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "chorus: internal error: %s\n", e.what());
    return 1;
  }
}
