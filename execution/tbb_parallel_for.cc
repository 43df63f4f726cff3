#include "execution/tbb_parallel_for.h"

#include <tbb/task_arena.h>
#include <tbb/task_group.h>

#include "execution/tsan_handoff.h"

namespace chorus {
namespace {

// The hand-off edges for TSan (execution/tsan_handoff.h). Fixed addresses, because a task cannot
// read a token from its functor before TSan knows the functor was handed over.
const char kFork = 0, kJoin = 0, kReuse = 0;

// oneTBB recycles a finished task's memory for the next task any thread creates; its pool's
// synchronisation is invisible to TSan. As the first member of a task functor: destroyed last,
// after the task has read its fields, it hands the memory on; copied first, before the new task's
// fields are written, it takes it over.
struct ReuseEdge {
  ReuseEdge() = default;
  ReuseEdge(const ReuseEdge&) { TsanTakeOver(&kReuse); }
  ReuseEdge& operator=(const ReuseEdge&) = delete;
  ~ReuseEdge() { TsanHandOff(&kReuse); }
};

// Marks the hand-off when copied or moved: as the last member of a task functor, it is copied
// last, after the members TBB's worker will read.
struct HandOffOnCopy {
  HandOffOnCopy() = default;
  HandOffOnCopy(const HandOffOnCopy&) { TsanHandOff(&kFork); }
  HandOffOnCopy& operator=(const HandOffOnCopy&) = delete;
};

// One item as a task: body(context, index).
struct ItemTask {
  ReuseEdge reuse;  // keep first
  void (*body)(void* context, int64_t i);
  void* context;
  int64_t index;
  HandOffOnCopy hand_off;  // keep last

  void operator()() const {
    TsanTakeOver(&kFork);
    body(context, index);
    TsanHandOff(&kJoin);
  }
};

}  // namespace

void TbbParallelFor::Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const {
  // One task per item, spawned by this thread into its arena: items are few and each is large
  // (a minibatch part, a bundle sample). Spawning them all from here (rather than splitting a
  // range on whichever threads pick it up) keeps every hand-off one TSan can be told of.
  TsanHandOff(&kFork);
  tbb::task_group tasks;
  for (int64_t i = 0; i < count; ++i) tasks.run(ItemTask{{}, body, context, i, {}});
  tasks.wait();
  TsanTakeOver(&kJoin);
}

int TbbParallelFor::Threads() const { return tbb::this_task_arena::max_concurrency(); }

}  // namespace chorus
