// common/parallel_for.h's ParallelFor over oneTBB: the items become tasks of the arena the calling
// thread runs in, so they use only threads that arena may use (for training: idle slots).
// Thread safety: stateless; one instance may serve every thread.
#pragma once

#include "common/parallel_for.h"

namespace chorus {

class TbbParallelFor final : public ParallelFor {
 public:
  void Run(int64_t count, void (*body)(void* context, int64_t i), void* context) const override;
  // The calling thread's arena's concurrency.
  int Threads() const override;
};

}  // namespace chorus
