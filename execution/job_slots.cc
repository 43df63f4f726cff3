#include "execution/job_slots.h"

#include <tbb/task_arena.h>

#include <algorithm>
#include <atomic>
#include <thread>
#include <vector>

#include "execution/tbb_parallel_for.h"
#include "execution/tsan_handoff.h"

namespace chorus {
namespace {

// The hand-off edges for TSan (execution/tsan_handoff.h). Fixed addresses, because a task cannot
// read a token from its functor before TSan knows the functor was handed over.
const char kJobStart = 0, kJobEnd = 0;

// The threads of the slots that have ended, shared among the jobs still running.
struct SlotCounts {
  std::atomic<int> running{0}, ended{0};

  int SharePerJob() const {
    const int jobs = running.load(std::memory_order_relaxed);
    return jobs > 0 ? ended.load(std::memory_order_relaxed) / jobs : 0;
  }
};

// A job's view of the arena: its own thread plus what it is granted now (execution/job_slots.h).
// Items run in order on the calling thread while it is granted nothing.
class GrantedParallelFor final : public ParallelFor {
 public:
  GrantedParallelFor(const ParallelFor& arena, const SlotCounts& counts, const TakenJob& job)
      : arena_(arena), counts_(counts), job_(job) {}

  void Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const override {
    if (Threads() > 1) {
      arena_.Run(count, body, context);
      return;
    }
    for (int64_t i = 0; i < count; ++i) body(context, i);
  }

  int Threads() const override {
    const int granted = 1 + counts_.SharePerJob() + std::max(0, job_.extra_threads.load(std::memory_order_relaxed));
    return std::min(granted, arena_.Threads());
  }

 private:
  const ParallelFor& arena_;
  const SlotCounts& counts_;
  const TakenJob& job_;
};

// One slot: take, train, hand back, until the source has nothing more for it.
Status RunSlot(JobSource& source, tbb::task_arena& arena, const ParallelFor& parallel, SlotCounts& counts) {
  while (true) {
    CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<TakenJob> job, source.Take());
    if (job == nullptr) return Status::Ok();
    const MemberSpec* spec = nullptr;
    const PreparedData* data = nullptr;
    const Status prepared = job->Prepare(&spec, &data);
    StatusOr<MemberResult> outcome = prepared.ok() ? Status::Internal("not run") : prepared;
    if (prepared.ok()) {
      const ProgressFn progress = [&job](const EpochProgress& p) { job->OnProgress(p); };
      const GrantedParallelFor granted(parallel, counts, *job);
      counts.running.fetch_add(1);
      // execute() may run the job on another of the arena's threads; TSan is told of the hand-off.
      const auto train = [&] {
        TsanTakeOver(&kJobStart);
        outcome = TrainMember(*spec, *data, progress, &job->cancel, &granted);
        TsanHandOff(&kJobEnd);
      };
      TsanHandOff(&kJobStart);  // after `train` exists: the thread running it reads it
      arena.execute(train);
      TsanTakeOver(&kJobEnd);
      counts.running.fetch_sub(1);
    }
    job->Finish(outcome);
  }
}

}  // namespace

Status RunJobSlots(JobSource& source, int slots, int threads) {
  tbb::task_arena arena(std::max(slots, threads));
  const TbbParallelFor parallel;
  SlotCounts counts;
  std::vector<Status> ends(static_cast<size_t>(slots));
  std::vector<std::thread> slot_threads;
  for (int i = 0; i < slots; ++i) {
    slot_threads.emplace_back([&, i] {
      ends[static_cast<size_t>(i)] = RunSlot(source, arena, parallel, counts);
      counts.ended.fetch_add(1);
    });
  }
  for (std::thread& t : slot_threads) t.join();
  for (const Status& st : ends) CHORUS_RETURN_IF_ERROR(st);
  return Status::Ok();
}

}  // namespace chorus
