#include "execution/job_slots.h"

#include <tbb/task_arena.h>

#include <thread>
#include <vector>

#include "execution/tbb_parallel_for.h"
#include "execution/tsan_handoff.h"

namespace chorus {
namespace {

// The hand-off edges for TSan (execution/tsan_handoff.h). Fixed addresses, because a task cannot
// read a token from its functor before TSan knows the functor was handed over.
const char kJobStart = 0, kJobEnd = 0;

// One slot: take, train, hand back, until the source has nothing more for it.
Status RunSlot(JobSource& source, tbb::task_arena& arena, const ParallelFor& parallel) {
  while (true) {
    CHORUS_ASSIGN_OR_RETURN(std::unique_ptr<TakenJob> job, source.Take());
    if (job == nullptr) return Status::Ok();
    const MemberSpec* spec = nullptr;
    const PreparedData* data = nullptr;
    const Status prepared = job->Prepare(&spec, &data);
    StatusOr<MemberResult> outcome = prepared.ok() ? Status::Internal("not run") : prepared;
    if (prepared.ok()) {
      const ProgressFn progress = [&job](const EpochProgress& p) { job->OnProgress(p); };
      // execute() may run the job on another of the arena's threads; TSan is told of the hand-off.
      const auto train = [&] {
        TsanTakeOver(&kJobStart);
        outcome = TrainMember(*spec, *data, progress, &job->cancel, &parallel);
        TsanHandOff(&kJobEnd);
      };
      TsanHandOff(&kJobStart);  // after `train` exists: the thread running it reads it
      arena.execute(train);
      TsanTakeOver(&kJobEnd);
    }
    job->Finish(outcome);
  }
}

}  // namespace

Status RunJobSlots(JobSource& source, int slots) {
  tbb::task_arena arena(slots);
  const TbbParallelFor parallel;
  std::vector<Status> ends(static_cast<size_t>(slots));
  std::vector<std::thread> threads;
  for (int i = 0; i < slots; ++i) {
    threads.emplace_back([&, i] { ends[static_cast<size_t>(i)] = RunSlot(source, arena, parallel); });
  }
  for (std::thread& t : threads) t.join();
  for (const Status& st : ends) CHORUS_RETURN_IF_ERROR(st);
  return Status::Ok();
}

}  // namespace chorus
