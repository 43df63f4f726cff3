// Running a run's jobs, stage after stage (search grid, folds, members: coordinator/run_plan.h),
// in this process or on chorus-worker processes over gRPC. Both leave each finished job's result
// in RUN_DIR/jobs/<JobName>/result.pb and differ only in where the training happens.
// Thread safety: call from one thread.
#pragma once

#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "common/config.h"
#include "common/member_training.h"
#include "common/prepared_data.h"
#include "common/status.h"
#include "coordinator/run_directory.h"

namespace chorus {

// Who ran jobs: (worker id, host), or ("in-process (N threads)", host).
using WorkersSeen = std::vector<std::pair<std::string, std::string>>;

// What a runner needs to know about the run; the pointers outlive the runner.
struct RunJobsInputs {
  const Config* config = nullptr;
  const PreparedData* data = nullptr;
  std::string config_hash;
};

class JobRunner {
 public:
  virtual ~JobRunner() = default;

  // Runs every spec until it has finished (result on disk) or failed. Returns one entry per spec:
  // "" for a finished job, else why it failed ("diverged: ...", "lease expired too often").
  // Errors: the runner itself cannot go on (see MakeJobRunner).
  virtual StatusOr<std::vector<std::string>> Run(const std::vector<MemberSpec>& specs) = 0;

  // Who has run jobs so far.
  virtual WorkersSeen Workers() const = 0;

  // No more stages: lets workers know the run is over and stops what the runner started.
  virtual void Close() = 0;
};

// In process when cluster.local_workers is 0 and cluster.listen is empty (compute.threads jobs at
// once), otherwise a coordinator serving chorus-worker processes (coordinator/cluster_run.h),
// started on the first Run. Errors from Run: kInvalidInput for a bad TLS/token file or an address
// that cannot be bound; kInternal if the embedded workers cannot be started or keep dying.
std::unique_ptr<JobRunner> MakeJobRunner(const RunJobsInputs& inputs, RunDirectory& dir);

// Whether the config trains in this process.
bool TrainsInProcess(const Config& config);

// How many jobs run at once on this machine: compute.threads (0: one per core) in process, else
// one per embedded worker (remote workers' jobs not counted).
int JobsAtOnceOnThisMachine(const Config& config);

}  // namespace chorus
