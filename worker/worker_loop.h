// The chorus-worker main loop, the gRPC transport of execution/job_slots.h: register, then on each
// of `slots` slot threads lease a job, make sure its data is at hand (memory, then the disk cache
// by hash, then FetchData), train it while a heartbeat thread renews the lease, carries progress
// and brings back the threads the coordinator grants the job (the idle workers' cores on this
// machine: execution/job_slots.h), and upload the result or report the failure. Reconnects with backoff while the
// coordinator is away, registers again when a restarted coordinator no longer knows its worker id,
// and retries an upload the coordinator is too busy to take (all its upload slots held).
// Thread safety: RunWorker is called once per process; `stop` may be set from a signal handler.
#pragma once

#include <atomic>
#include <string>

#include "common/status.h"
#include "worker/coordinator_client.h"

namespace chorus {

struct WorkerOptions {
  ConnectionOptions connection;
  int slots = 1;                 // jobs run at once, >= 1
  std::string cache_dir;         // where fetched data sets are kept by hash; empty = no disk cache
  bool exit_when_done = false;   // exit once the coordinator says every job is settled
  double max_backoff_seconds = 10;
};

// Returns Ok when done (exit_when_done) or stopped, kInvalidInput if the coordinator refused the
// token, and other errors for local failures (unwritable cache...). On stop, running jobs are
// cancelled and their leases returned before this returns.
Status RunWorker(const WorkerOptions& options, const std::atomic<bool>& stop);

}  // namespace chorus
