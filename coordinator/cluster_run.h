// Running a run's member jobs on chorus-worker processes: the gRPC server, the embedded local
// workers, lease expiry, and the progress view. Results land in RUN_DIR/jobs/<i>/result.pb.
// Thread safety: call from one thread.
#pragma once

#include <string>
#include <vector>

#include "common/config.h"
#include "common/dataset.h"
#include "common/member_training.h"
#include "coordinator/job_table.h"
#include "coordinator/run_directory.h"

namespace chorus {

struct ClusterJobs {
  const Config* config = nullptr;
  const PreparedData* data = nullptr;
  std::string config_hash;
  std::vector<MemberSpec> specs;
  std::vector<bool> already_finished;  // jobs whose results are on disk (resume)
};

struct ClusterOutcome {
  std::vector<JobSnapshot> jobs;                  // each job's final state
  std::vector<std::pair<std::string, std::string>> workers;  // (worker id, host) seen
};

// Serves jobs until every one has finished or failed.
// Errors: kInvalidInput for a bad TLS/token file or an address that cannot be bound; kInternal
// if the embedded workers cannot be started or all keep dying.
StatusOr<ClusterOutcome> RunJobsOnWorkers(const ClusterJobs& jobs, RunDirectory& dir);

}  // namespace chorus
