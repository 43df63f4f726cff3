#include "execution/job_slots.h"

#include <algorithm>
#include <atomic>
#include <thread>
#include <vector>

#include "execution/helper_team.h"

namespace chorus {
namespace {

// The threads of the slots that have ended, shared among the jobs still running.
struct SlotCounts {
  std::atomic<int> running{0}, ended{0};

  int SharePerJob() const {
    const int jobs = running.load(std::memory_order_relaxed);
    return jobs > 0 ? ended.load(std::memory_order_relaxed) / jobs : 0;
  }
};

// A job's threads: its own plus what it is granted now (execution/job_slots.h), at most
// max_threads, the extra ones from a HelperTeam of its own.
class GrantedParallelFor final : public ParallelFor {
 public:
  GrantedParallelFor(int max_threads, const SlotCounts& counts, const TakenJob& job)
      : helpers_(max_threads - 1), counts_(counts), job_(job) {}

  void Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const override {
    helpers_.Run(Threads() - 1, count, body, context);
  }

  int Threads() const override {
    const int extra = counts_.SharePerJob() + std::max(0, job_.extra_threads.load(std::memory_order_relaxed));
    return 1 + std::min(extra, helpers_.max_helpers());
  }

 private:
  mutable HelperTeam helpers_;  // used by the job's thread only (ParallelFor::Run is const)
  const SlotCounts& counts_;
  const TakenJob& job_;
};

// One slot: take, train, hand back, until the source has nothing more for it.
Status RunSlot(JobSource& source, int max_threads, SlotCounts& counts) {
  while (true) {
    CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<TakenJob> job, source.Take());
    if (job == nullptr) return Status::Ok();
    const MemberSpec* spec = nullptr;
    const PreparedData* data = nullptr;
    const Status prepared = job->Prepare(&spec, &data);
    StatusOr<MemberResult> outcome = prepared.ok() ? Status::Internal("not run") : prepared;
    if (prepared.ok()) {
      const ProgressFn progress = [&job](const EpochProgress& p) { job->OnProgress(p); };
      const GrantedParallelFor granted(max_threads, counts, *job);
      counts.running.fetch_add(1);
      outcome = TrainMember(*spec, *data, progress, &job->cancel, &granted);
      counts.running.fetch_sub(1);
    }
    job->Finish(outcome);
  }
}

}  // namespace

Status RunJobSlots(JobSource& source, int slots, int threads) {
  const int max_threads = std::max(slots, threads);
  SlotCounts counts;
  std::vector<Status> ends(static_cast<size_t>(slots));
  std::vector<std::thread> slot_threads;
  for (int i = 0; i < slots; ++i) {
    slot_threads.emplace_back([&, i] {
      ends[static_cast<size_t>(i)] = RunSlot(source, max_threads, counts);
      counts.ended.fetch_add(1);
    });
  }
  for (std::thread& t : slot_threads) t.join();
  for (const Status& st : ends) CHORUS_RETURN_IF_ERROR(st);
  return Status::Ok();
}

}  // namespace chorus
