#include "worker/local_trainer.h"

#include <tbb/parallel_for.h>
#include <tbb/task_arena.h>

#include <mutex>

#include "worker/tbb_parallel_for.h"

namespace chorus {

std::vector<StatusOr<MemberResult>> TrainMembersLocally(const std::vector<MemberSpec>& specs,
                                                        const PreparedData& data, int threads,
                                                        const ProgressFn& progress,
                                                        const MemberDoneFn& done) {
  std::vector<StatusOr<MemberResult>> results(specs.size(), Status::Internal("not run"));
  std::mutex callback_mutex;
  ProgressFn serialised_progress;
  if (progress) {
    serialised_progress = [&](const EpochProgress& p) {
      std::lock_guard<std::mutex> lock(callback_mutex);
      progress(p);
    };
  }
  const TbbParallelFor parallel;  // a member's minibatch parts, on threads no member is using
  tbb::task_arena arena(threads > 0 ? threads : tbb::task_arena::automatic);
  arena.execute([&] {
    tbb::parallel_for(size_t{0}, specs.size(), [&](size_t i) {
      results[i] = TrainMember(specs[i], data, serialised_progress, nullptr, &parallel);
      if (done) {
        std::lock_guard<std::mutex> lock(callback_mutex);
        done(specs[i], results[i]);
      }
    });
  });
  return results;
}

}  // namespace chorus
