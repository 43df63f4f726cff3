// `chorus run CONFIG`: load and validate, train every member, assemble, report, all in process.
// Thread safety: call from one thread.
#pragma once

#include <string>

namespace chorus {

struct RunOptions {
  std::string config_path;  // the config; with resume_dir empty, RUN_DIR/config.yaml is used
  std::string resume_dir;   // continue this run directory: finished jobs are kept, not rerun
  std::string out_dir;      // overrides run.out_dir when non-empty
  int threads = -1;         // overrides compute.threads when >= 0
  int workers = -1;         // overrides cluster.local_workers when >= 0
  bool skip_memory_check = false;  // run even if the estimated memory exceeds this machine's
};

// Where members train: in this process when cluster.local_workers is 0 and cluster.listen is
// empty, otherwise on chorus-worker processes over gRPC (coordinator/cluster_run.h).
// Before anything is written, the run's memory is estimated (common/memory_estimate.h); unless
// skip_memory_check, a run that would not fit this machine (common/host_memory.h) is refused
// (exit 2) and nothing is written.
// Returns the process exit code (docs/design.md): 0 success, 1 internal failure, 2 bad input,
// 3 too few members finished. Progress goes to stderr, the summary table to stdout, errors to
// stderr. On failure after the run directory exists, manifest.json says "failed" and why and no
// report.json is written.
int RunCommand(const RunOptions& options);

}  // namespace chorus
