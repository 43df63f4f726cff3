// JobRunner on chorus-worker processes: the gRPC server, the embedded local workers, lease
// expiry and the progress view. Started on the first Run and kept up between stages, so workers
// stay connected while the next stage is planned; Close tells them the run is over.
// Thread safety: call from one thread.
#pragma once

#include <memory>

#include "coordinator/job_runner.h"

namespace chorus {

std::unique_ptr<JobRunner> MakeWorkerPoolRunner(const RunJobsInputs& inputs, RunDirectory& dir);

// The chorus-worker processes started on this machine: cluster.local_workers, or one per core
// when it is -1. Each runs one job at a time.
int LocalWorkerCount(const ClusterConfig& c);

}  // namespace chorus
