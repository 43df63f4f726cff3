// JobRunner in this process: jobs train on a oneTBB arena of compute.threads threads
// (worker/local_trainer.h), each result written atomically as it finishes.
#include <thread>

#include "common/file_util.h"
#include "common/host_name.h"
#include "coordinator/cluster_run.h"
#include "coordinator/job_runner.h"
#include "coordinator/terminal.h"
#include "proto/result_codec.h"
#include "worker/local_trainer.h"

namespace chorus {
namespace {

class InProcessRunner final : public JobRunner {
 public:
  InProcessRunner(const RunJobsInputs& in, RunDirectory& dir) : in_(in), dir_(dir) {}

  StatusOr<std::vector<std::string>> Run(const std::vector<MemberSpec>& specs) override {
    const BasinConfig& basin = in_.config->ensemble.basin;
    ProgressPrinter printer(stderr, static_cast<int>(specs.size()),
                            in_.config->train.epochs + (basin.method == BasinMethod::kNone ? 0 : basin.epochs));
    std::vector<std::string> causes(specs.size());
    auto done = [&](const MemberSpec& spec, const StatusOr<MemberResult>& r) {
      Status st = r.status();
      if (st.ok()) {
        StatusOr<std::string> job_dir = dir_.JobDir(JobName(spec));
        st = job_dir.ok() ? WriteFileAtomic(job_dir.value() + "/result.pb",
                                            EncodeJobResult(r.value(), NetworkFor(spec.model, *in_.data).widths(),
                                                            in_.data->hash, in_.config_hash))
                          : job_dir.status();
      }
      const size_t position = static_cast<size_t>(&spec - specs.data());  // `done` gets specs[i]
      if (!st.ok()) causes[position] = st.ToString();
      dir_.LogJobEvent(spec, !st.ok(), {{"cause", causes[position]}});
      printer.OnMemberDone(spec.index, st);
    };
    TrainMembersLocally(specs, *in_.data, in_.config->compute.threads,
                        [&](const EpochProgress& p) { printer.OnEpoch(p); }, done);
    printer.Finish();
    return causes;
  }

  WorkersSeen Workers() const override {
    const int threads = in_.config->compute.threads;
    const unsigned n = threads > 0 ? static_cast<unsigned>(threads) : std::thread::hardware_concurrency();
    return {{"in-process (" + std::to_string(n) + " threads)", HostName()}};
  }

  void Close() override {}

 private:
  RunJobsInputs in_;
  RunDirectory& dir_;
};

}  // namespace

bool TrainsInProcess(const Config& c) { return c.cluster.local_workers == 0 && c.cluster.listen.empty(); }

std::unique_ptr<JobRunner> MakeJobRunner(const RunJobsInputs& inputs, RunDirectory& dir) {
  if (TrainsInProcess(*inputs.config)) return std::make_unique<InProcessRunner>(inputs, dir);
  return MakeWorkerPoolRunner(inputs, dir);
}

}  // namespace chorus
