// The one way code in common/ spreads work over threads without owning any: the caller passes a
// ParallelFor (the executables pass execution/tbb_parallel_for.h's), or null for one item after
// another on the calling thread. Results never depend on which: each item writes its own output.
// Thread safety: implementations are stateless; one instance may serve every thread.
#pragma once

#include <cstdint>
#include <type_traits>

namespace chorus {

class ParallelFor {
 public:
  virtual ~ParallelFor() = default;
  // Runs body(context, i) for every i in [0, count), in any order and possibly in parallel;
  // returns when all calls have returned. Allocates nothing per call.
  virtual void Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const = 0;
  // The most items that may run at the same time now (>= 1): how many pieces work is worth
  // cutting into. May change between calls (a job granted an idle core); results must not depend
  // on it.
  virtual int Threads() const = 0;
};

// parallel->Threads(), or 1 for null (items in order on the calling thread).
inline int ThreadsOf(const ParallelFor* parallel) {
  return parallel == nullptr ? 1 : parallel->Threads();
}

// Calls fn(i) for every i in [0, count) through `parallel`, or in order on this thread when it
// is null. fn must be safe to call concurrently for different i.
template <typename Fn>
void ParallelForEach(const ParallelFor* parallel, int64_t count, Fn&& fn) {
  if (parallel == nullptr) {
    for (int64_t i = 0; i < count; ++i) fn(i);
    return;
  }
  using FnType = std::remove_reference_t<Fn>;
  parallel->Run(count, [](void* context, int64_t i) { (*static_cast<FnType*>(context))(i); },
                const_cast<void*>(static_cast<const void*>(&fn)));
}

}  // namespace chorus
