// JobRunner in this process: a stage's jobs are queued for execution/job_slots.h's slot threads
// (compute.threads of them), each result written atomically as it finishes.
#include <algorithm>
#include <atomic>
#include <mutex>
#include <thread>

#include "common/file_util.h"
#include "common/host_name.h"
#include "coordinator/cluster_run.h"
#include "coordinator/job_runner.h"
#include "coordinator/terminal.h"
#include "execution/job_slots.h"
#include "proto/result_codec.h"

namespace chorus {
namespace {

int SlotCount(const Config& config) {
  const int threads = config.compute.threads;
  return threads > 0 ? threads : std::max(1, static_cast<int>(std::thread::hardware_concurrency()));
}

// One stage's jobs, taken in order. Progress and outcomes are handled one at a time: the printer
// and the run directory's event log see one caller.
class StageQueue final : public JobSource {
 public:
  StageQueue(const RunJobsInputs& in, RunDirectory& dir, const std::vector<MemberSpec>& specs)
      : in_(in), dir_(dir), specs_(specs), causes_(specs.size()),
        printer_(stderr, static_cast<int>(specs.size()),
                 in.config->train.epochs +
                     (in.config->ensemble.basin.method == BasinMethod::kNone ? 0 : in.config->ensemble.basin.epochs)) {}

  StatusOr<std::unique_ptr<TakenJob>> Take() override {
    const size_t position = next_.fetch_add(1);
    if (position >= specs_.size()) return std::unique_ptr<TakenJob>();
    return std::unique_ptr<TakenJob>(std::make_unique<QueuedJob>(*this, position));
  }

  // "" for each finished job, else why it failed. Call after RunJobSlots has returned.
  std::vector<std::string> Causes() {
    printer_.Finish();
    return causes_;
  }

 private:
  class QueuedJob final : public TakenJob {
   public:
    QueuedJob(StageQueue& queue, size_t position) : queue_(queue), position_(position) {}

    Status Prepare(const MemberSpec** spec, const PreparedData** data) override {
      *spec = &queue_.specs_[position_];
      *data = queue_.in_.data;
      return Status::Ok();
    }

    void OnProgress(const EpochProgress& p) override {
      std::lock_guard<std::mutex> lock(queue_.mu_);
      queue_.printer_.OnEpoch(p);
    }

    void Finish(const StatusOr<MemberResult>& outcome) override {
      std::lock_guard<std::mutex> lock(queue_.mu_);
      queue_.Store(position_, outcome);
    }

   private:
    StageQueue& queue_;
    const size_t position_;
  };

  // Writes the result (or records the cause) of specs_[position]; called under mu_.
  void Store(size_t position, const StatusOr<MemberResult>& outcome) {
    const MemberSpec& spec = specs_[position];
    Status st = outcome.status();
    if (st.ok()) {
      StatusOr<std::string> job_dir = dir_.JobDir(JobName(spec));
      st = job_dir.ok() ? WriteFileAtomic(job_dir.value() + "/result.pb",
                                          EncodeJobResult(outcome.value(), NetworkFor(spec.model, *in_.data).widths(),
                                                          in_.data->hash, in_.config_hash))
                        : job_dir.status();
    }
    if (!st.ok()) causes_[position] = st.ToString();
    nlohmann::json fields = {{"cause", causes_[position]}};
    if (st.ok()) fields["cpu_seconds"] = CpuSecondsJson(outcome.value().cpu_seconds);
    dir_.LogJobEvent(spec, !st.ok(), fields);
    printer_.OnMemberDone(spec.index, st);
  }

  const RunJobsInputs& in_;
  RunDirectory& dir_;
  const std::vector<MemberSpec>& specs_;
  std::atomic<size_t> next_{0};
  std::mutex mu_;
  std::vector<std::string> causes_;
  ProgressPrinter printer_;
};

class InProcessRunner final : public JobRunner {
 public:
  InProcessRunner(const RunJobsInputs& in, RunDirectory& dir) : in_(in), dir_(dir) {}

  StatusOr<std::vector<std::string>> Run(const std::vector<MemberSpec>& specs) override {
    StageQueue queue(in_, dir_, specs);
    CHORUS_RETURN_IF_ERROR(RunJobSlots(queue, SlotCount(*in_.config)));
    return queue.Causes();
  }

  WorkersSeen Workers() const override {
    return {{"in-process (" + std::to_string(SlotCount(*in_.config)) + " threads)", HostName()}};
  }

  void Close() override {}

 private:
  RunJobsInputs in_;
  RunDirectory& dir_;
};

}  // namespace

bool TrainsInProcess(const Config& c) { return c.cluster.local_workers == 0 && c.cluster.listen.empty(); }

int JobsAtOnceOnThisMachine(const Config& c) {
  return TrainsInProcess(c) ? SlotCount(c) : LocalWorkerCount(c.cluster);
}

std::unique_ptr<JobRunner> MakeJobRunner(const RunJobsInputs& inputs, RunDirectory& dir) {
  if (TrainsInProcess(*inputs.config)) return std::make_unique<InProcessRunner>(inputs, dir);
  return MakeWorkerPoolRunner(inputs, dir);
}

}  // namespace chorus
