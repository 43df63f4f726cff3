// Running member jobs on this machine: `slots` threads each take a job from a JobSource, train it
// (common/member_training.h TrainMember) and hand the outcome back to the source. chorus-worker
// (jobs leased from a coordinator over gRPC, worker/worker_loop.h) and chorus run's in-process
// route (a stage's jobs in a queue, coordinator/in_process_runner.cc) both run jobs this way and
// differ only in their JobSource, that is, in transport.
// A job trains on its slot's thread, plus the threads it is granted: the slots of this
// RunJobSlots that have ended (no more jobs for them), shared among the jobs still running, and
// TakenJob::extra_threads, which the source sets (a coordinator that sees other workers on this
// machine idle). Granted threads (execution/helper_team.h) take blocks of the member's products
// and passes, or its minibatch parts (common/training_step.h); the job's result does not depend
// on how many threads it had, nor on when a grant changed.
// Thread safety: RunJobSlots calls a source's Take from every slot thread at once, and a taken
// job's methods from the slot (and training) thread that took it.
#pragma once

#include <atomic>
#include <memory>

#include "common/member_training.h"
#include "common/prepared_data.h"
#include "common/status.h"

namespace chorus {

// One job a slot has taken: what to train, and where its progress and outcome go.
class TakenJob {
 public:
  virtual ~TakenJob() = default;

  // What to train; both stay valid until Finish returns. An error (data that cannot be had, a
  // malformed spec) becomes the job's outcome without training.
  virtual Status Prepare(const MemberSpec** spec, const PreparedData** data) = 0;

  // After each epoch, on the thread training the job.
  virtual void OnProgress(const EpochProgress& progress) = 0;

  // The outcome, on the slot's thread: the result, kCancelled (see `cancel`), kDiverged or
  // another error.
  virtual void Finish(const StatusOr<MemberResult>& outcome) = 0;

  // Set from any thread to stop the training at the end of its current epoch (kCancelled).
  std::atomic<bool> cancel{false};

  // Threads beyond its slot's that the job may use now; the source may change it at any time.
  std::atomic<int> extra_threads{0};
};

class JobSource {
 public:
  virtual ~JobSource() = default;

  // The next job for a slot, blocking until there is one; null when the slot should end (no more
  // jobs, or stopped). An error ends the slot.
  virtual StatusOr<std::unique_ptr<TakenJob>> Take() = 0;
};

// Runs `slots` (>= 1) slot threads until each has ended; returns the first error a slot ended
// with, else Ok. A job uses at most max(slots, threads) threads, its own included.
Status RunJobSlots(JobSource& source, int slots, int threads = 0);

}  // namespace chorus
